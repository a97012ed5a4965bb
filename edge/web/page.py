"""The operator page: ``GET /`` and its assets (shipped in ``edge/web/static``, no build
step, nothing from elsewhere), sign-in (``/api/v1/session``) and the live stream
(``GET /api/v1/live``, server-sent events).

Every page response carries a strict Content-Security-Policy (scripts, styles and
connections to this origin only; no inline script or style, no framing). Reads follow
the API's rule (open to whoever can reach the port); writes need the session cookie and
its CSRF token, or the API token itself.

The live stream sends a compact message every ``every`` seconds (default 2): each point's
figures in display units every time, each flow's too (``f``, see ``edge.web.flows``);
point and flow texts (quality reason, hints, phase), alarms,
alarm-system health and sources only when they changed since the last message on that
connection.
"""

from __future__ import annotations

import asyncio
import json
import math
from importlib import resources
from typing import Any

from aiohttp import web

from edge import ADVISORY_NOTICE, units
from edge.errors import StorageError
from edge.web.api import MONITOR, alarm_json, point_json
from edge.web.flows import flow_texts, live_flows
from edge.web.port import MonitorPort
from edge.web.session import COOKIE, LIFETIME, SESSIONS

__all__ = ["CSP", "add_routes", "live_message"]

CSP = (
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; "
    "connect-src 'self'; base-uri 'none'; form-action 'self'; frame-ancestors 'none'"
)
ASSETS = {
    "app.js": "text/javascript",
    "style.css": "text/css",
}
QUALITY_CODE = {"good": 2, "uncertain": 1, "bad": 0}


def _static(name: str) -> bytes:
    return resources.files("edge.web").joinpath("static", name).read_bytes()


def _secure(response: web.StreamResponse) -> web.StreamResponse:
    h = response.headers
    h["Content-Security-Policy"] = CSP
    h["X-Content-Type-Options"] = "nosniff"
    h["Referrer-Policy"] = "no-referrer"
    h["X-Frame-Options"] = "DENY"
    h["Cache-Control"] = "no-cache"
    return response


async def index(request: web.Request) -> web.StreamResponse:
    return _secure(
        web.Response(body=_static("index.html"), content_type="text/html", charset="utf-8")
    )


async def asset(request: web.Request) -> web.StreamResponse:
    name = request.match_info["name"]
    if name not in ASSETS:
        raise web.HTTPNotFound(text=f"no asset named {name!r}")
    return _secure(web.Response(body=_static(name), content_type=ASSETS[name], charset="utf-8"))


# --- sign-in ----------------------------------------------------------------------------


async def sign_in(request: web.Request) -> web.Response:
    """POST with ``Authorization: Bearer <API token>`` (checked by the guard) and
    ``{"user": "name"}``: sets the session cookie, answers the CSRF token."""
    monitor = request.app[MONITOR]
    try:
        body = json.loads(await request.read() or b"{}")
    except (ValueError, UnicodeDecodeError) as exc:
        raise web.HTTPBadRequest(text=f"the body is not JSON: {exc}") from exc
    user = body.get("user") if isinstance(body, dict) else None
    if not isinstance(user, str) or not user.strip() or len(user) > 80:
        raise web.HTTPBadRequest(text="'user' (your name, up to 80 characters) is required")
    s = request.app[SESSIONS].create(user.strip(), monitor.token)
    response = web.json_response({"user": s.user, "csrf": s.csrf})
    response.set_cookie(
        COOKIE,
        s.id,
        max_age=int(LIFETIME),
        path="/",
        httponly=True,
        samesite="Strict",
        secure=request.secure,
    )
    return response


async def session_info(request: web.Request) -> web.Response:
    """Who is signed in on this browser, and the CSRF token for its writes (readable by
    this origin's scripts only: no CORS headers are ever sent)."""
    monitor = request.app[MONITOR]
    s = request.app[SESSIONS].get(request, monitor.token)
    answer: dict[str, Any] = {"signed_in": s is not None, "writes": monitor.token is not None}
    if s is not None:
        answer.update(user=s.user, csrf=s.csrf)
    return web.json_response(answer, headers={"Cache-Control": "no-store"})


async def sign_out(request: web.Request) -> web.Response:
    monitor = request.app[MONITOR]
    sessions = request.app[SESSIONS]
    s = sessions.get(request, monitor.token)
    if s is not None:
        sessions.end(s)
    response = web.json_response({"signed_in": False})
    response.del_cookie(COOKIE, path="/")
    return response


# --- the live stream ----------------------------------------------------------------------


def _num(v: float | None, digits: int) -> float | None:
    return round(v, digits) if v is not None and math.isfinite(v) else None


def _figures(p: Any, baro: float | None) -> list[Any]:
    """[p abs bar, p gauge bar, T degC, Tsat degC, superheat K, quality code]."""

    def value(q: str) -> float | None:
        r = p.readings.get(q)
        return r.value if r is not None and r.usable else None

    pa, t, ts, sh = value("pressure"), value("temperature"), value("tsat"), value("superheat")
    return [
        _num(pa / 1e5 if pa is not None else None, 4),
        _num((pa - baro) / 1e5 if pa is not None and baro is not None else None, 4),
        _num(t - units.ZERO_CELSIUS if t is not None else None, 2),
        _num(ts - units.ZERO_CELSIUS if ts is not None else None, 2),
        _num(sh, 2),
        QUALITY_CODE.get(p.quality.name, 0),
    ]


def _point_text(p: Any) -> dict[str, Any]:
    d = point_json(p)
    d.pop("readings", None)
    return d


def _alarm_rows(monitor: Any) -> list[dict[str, Any]]:
    defs = monitor.alarm_defs
    rows = []
    for name, s in sorted(monitor.alarm_states.items()):
        d = defs.get(name)
        rows.append(alarm_json(name, s, d))  # the live value, activation and units in it
    return rows


def _health(monitor: MonitorPort) -> Any:
    try:
        health = monitor.alarm_health()
        return None if health is None else health.to_dict()
    except StorageError as exc:
        return {"error": str(exc)}


def _sources(monitor: Any) -> list[dict[str, Any]]:
    out = []
    for name, src in sorted(monitor.sources.items()):
        h = src.health
        out.append(
            {
                "name": name,
                "up": bool(h.up),
                "last_read": _num(getattr(h, "last_read_time", None) or None, 1),
                "error": getattr(h, "last_error", "") or None,
            }
        )
    return out


def live_message(monitor: Any, last: dict[str, str]) -> dict[str, Any]:
    """One message of the stream; ``last`` (per connection) keeps what was sent, so the
    texts that did not change are left out."""
    runtime = monitor.runtime
    points = runtime.light if runtime is not None else {}
    baro = monitor.barometer
    bv = baro.value if baro is not None else None
    msg: dict[str, Any] = {
        "t": round(monitor.clock(), 1),
        "p": {name: _figures(p, bv) for name, p in sorted(points.items())},
    }
    if runtime is not None and runtime.plan.flows:  # [t/h, kW, t, GJ, s not measured, q]
        msg["f"] = live_flows(runtime)
    parts = {
        "texts": lambda: {name: _point_text(p) for name, p in sorted(points.items())},
        "flow_texts": lambda: flow_texts(runtime),
        "alarms": lambda: _alarm_rows(monitor),
        "health": lambda: _health(monitor),
        "sources": lambda: _sources(monitor),
        "site": lambda: {
            "site": monitor.config.site,
            "notice": ADVISORY_NOTICE,
            "barometer": None
            if baro is None
            else {
                "value": _num(baro.value / 1e5, 5),
                "origin": baro.origin,
                "quality": baro.quality.name,
            },
        },
    }
    for key, make in parts.items():
        value = make()
        text = json.dumps(value, separators=(",", ":"), sort_keys=True, default=str)
        if last.get(key) != text:
            last[key] = text
            msg[key] = value
    return msg


async def live(request: web.Request) -> web.StreamResponse:
    """Server-sent events: a ``data:`` line of JSON every ``every`` s (1 to 60)."""
    try:
        every = min(60.0, max(1.0, float(request.query.get("every", "2"))))
    except ValueError:
        raise web.HTTPBadRequest(text="'every' must be a number of seconds") from None
    monitor = request.app[MONITOR]
    response = web.StreamResponse(
        headers={
            "Content-Type": "text/event-stream",
            "Cache-Control": "no-store",
            "X-Accel-Buffering": "no",
        }
    )
    _secure(response)
    response.headers["Cache-Control"] = "no-store"
    await response.prepare(request)
    last: dict[str, str] = {}
    await response.write(b"retry: 3000\n\n")
    try:
        while True:
            msg = live_message(monitor, last)
            data = json.dumps(msg, separators=(",", ":"), default=str)
            await response.write(f"data: {data}\n\n".encode())
            await asyncio.sleep(every)
    except ConnectionResetError:  # the page went away
        pass
    return response


async def favicon(request: web.Request) -> web.Response:
    return web.Response(status=204)


def add_routes(app: web.Application) -> None:
    app.router.add_get("/", index)
    app.router.add_get("/favicon.ico", favicon)
    app.router.add_get("/static/{name}", asset)
    app.router.add_post("/api/v1/session", sign_in)
    app.router.add_get("/api/v1/session", session_info)
    app.router.add_delete("/api/v1/session", sign_out)
    app.router.add_get("/api/v1/live", live)
