"""The aiohttp application: /metrics, /healthz, /readyz and the /api/v1 routes.

Every request that is not a read (GET/HEAD) goes through ``guard`` first, before routing
and before the body is read: without a configured token such requests are disabled (403),
with one the ``Authorization: Bearer`` header must match (``hmac.compare_digest``) or the
answer is 401, whatever the path, so an unauthenticated caller learns nothing (not even
whether an alarm exists). The operator page's requests carry a session cookie instead
(``edge.web.session``): a missing or stale session, or a wrong CSRF token, is 403.
Then the body size is checked (413). Errors are JSON
``{"error", "detail"}``.
"""

from __future__ import annotations

import asyncio
import hmac
from pathlib import Path
from typing import Any

from aiohttp import web
from prometheus_client import CollectorRegistry, ProcessCollector, generate_latest

from edge.logs import Limited, get_logger
from edge.web import api, flows, history, page
from edge.web.api import MONITOR
from edge.web.exposition import CONTENT_TYPE, render_parts
from edge.web.metrics import families
from edge.web.port import MonitorPort
from edge.web.session import COOKIE, SESSIONS, Sessions

__all__ = ["OPENAPI_PATH", "build_app", "error"]

OPENAPI_PATH = Path(__file__).with_name("openapi.yaml")
REGISTRY: web.AppKey[Any] = web.AppKey("registry", object)
MAX_BODY: web.AppKey[int] = web.AppKey("max_body", int)
_log = get_logger(component="http")
_failed = Limited(_log, window=60.0, burst=5)
READ_METHODS = frozenset({"GET", "HEAD", "OPTIONS"})


def error(status: int, code: str, detail: str, **extra: Any) -> web.Response:
    return web.json_response({"error": code, "detail": detail, **extra}, status=status)


def _bearer(request: web.Request) -> str | None:
    header = request.headers.get("Authorization", "")
    scheme, _, value = header.partition(" ")
    if scheme.lower() != "bearer" or not value.strip():
        return None
    return value.strip()


@web.middleware
async def guard(request: web.Request, handler: Any) -> web.StreamResponse:
    """Token first (403 when none is configured, 401 when wrong), then the body size."""
    if request.method not in READ_METHODS:
        monitor = request.app[MONITOR]
        token = monitor.token
        if not token:
            return error(
                403,
                "writes_disabled",
                "no API token is configured (http.token_env or http.token_file), so requests "
                "that change state are disabled",
            )
        given = _bearer(request)
        # a header byte that is not UTF-8 arrives as a lone surrogate: compare bytes
        raw = given.encode("utf-8", "surrogateescape") if given is not None else None
        if given is None and COOKIE in request.cookies:  # the operator page, signed in
            problem = request.app[SESSIONS].check_write(request, token)
            if problem is not None:
                return error(403, problem, "sign in again on the page (session or CSRF token)")
        elif raw is None or not hmac.compare_digest(raw, token.encode()):
            response = error(401, "unauthorized", "a valid 'Authorization: Bearer' is required")
            response.headers["WWW-Authenticate"] = 'Bearer realm="steam-edge"'
            return response
        limit = request.app[MAX_BODY]
        if request.content_length is not None and request.content_length > limit:
            return error(413, "body_too_large", f"the request body exceeds {limit} bytes")
    try:
        return await handler(request)
    except web.HTTPRequestEntityTooLarge:
        limit = request.app[MAX_BODY]
        return error(413, "body_too_large", f"the request body exceeds {limit} bytes")
    except web.HTTPException as exc:
        if exc.status < 400:
            raise
        code = exc.reason.lower().replace(" ", "_")
        return error(exc.status, code, exc.text or exc.reason, **_allow(exc))
    except Exception as exc:  # a bug: say so in the log (rate-limited), answer JSON
        _failed(
            "exception", "http_handler_failed", path=request.path[:200], error=type(exc).__name__
        )
        return error(500, "internal_error", "the monitor failed to answer; see its log")


def _allow(exc: web.HTTPException) -> dict[str, Any]:
    allowed = exc.headers.get("Allow")
    return {"allowed": allowed.split(",")} if allowed else {}


async def metrics(request: web.Request) -> web.StreamResponse:
    """The monitor's families (fast path), then the process figures of the registry.
    ``?name[]=steamedge_...`` (repeatable) limits the answer to those metrics."""
    names = request.query.getall("name[]", [])
    wanted = set(names) if names else None
    view = request.app[MONITOR].live_view(wanted)
    registry = request.app[REGISTRY]
    if not names:
        extra = generate_latest(registry)
    elif any(not n.startswith(OWN_PREFIX) for n in names):
        extra = generate_latest(registry.restricted_registry(names))
    else:  # only the monitor's own families asked for: no /proc reads for process_*
        extra = b""
    found = families(view, wanted)  # read here, on the loop: live state stays consistent
    if sum(len(f.samples) for f in found) > RENDER_IN_THREAD:
        # writing 60,000 lines (10,000 tags) takes long enough that the sources' replies
        # and the evaluation pass would wait behind it; the families are plain data now
        parts = await asyncio.to_thread(render_parts, found)
    else:
        parts = render_parts(found)
    del found
    parts.append(extra)
    response = web.StreamResponse(headers={"Content-Type": CONTENT_TYPE})
    response.content_length = sum(map(len, parts))
    await response.prepare(request)
    parts.reverse()
    try:
        while parts and request.method != "HEAD":  # each piece let go once written
            await response.write(parts.pop())
        await response.write_eof()
    except ConnectionError:  # the scraper went away mid-body: nobody left to tell
        pass
    return response


OWN_PREFIX = "steamedge_"  # the monitor's families; the registry holds process_* and the like
RENDER_IN_THREAD = 20_000  # samples: above this a scrape is written in a worker thread


async def healthz(request: web.Request) -> web.Response:
    if request.app[MONITOR].alive():
        return web.json_response({"status": "alive"})
    return error(503, "not_alive", "the evaluation loop has stopped or is stuck")


async def readyz(request: web.Request) -> web.Response:
    checks = request.app[MONITOR].readiness()
    if all(checks.values()):
        return web.json_response({"status": "ready", "checks": checks})
    missing = ", ".join(k for k, ok in checks.items() if not ok)
    return error(503, "not_ready", f"not ready: {missing}", checks=checks)


async def openapi(request: web.Request) -> web.Response:
    return web.Response(text=OPENAPI_PATH.read_text(), content_type="application/yaml")


def build_app(monitor: MonitorPort, registry: CollectorRegistry | None = None) -> web.Application:
    """The web application over a running monitor. /metrics serves the monitor's families
    read at scrape time, followed by ``registry`` (a fresh one with the process collector
    unless given; never the global registry)."""
    max_body = monitor.config.http.max_body
    app = web.Application(middlewares=[guard], client_max_size=max_body)
    app[MONITOR] = monitor
    app[MAX_BODY] = max_body
    if registry is None:
        registry = CollectorRegistry(auto_describe=False)
        ProcessCollector(registry=registry)
    app[REGISTRY] = registry
    app.router.add_get("/metrics", metrics)
    app.router.add_get("/healthz", healthz)
    app.router.add_get("/readyz", readyz)
    app.router.add_get("/api/v1/openapi.yaml", openapi)
    api.add_routes(app)
    flows.add_flow_routes(app)
    app[SESSIONS] = Sessions()
    history.add_routes(app)
    page.add_routes(app)
    return app
