"""The HTTP server around the web app, hardened for a hostile network.

- ``IDLE_TIMEOUT``: a connection that sends no complete request (headers included) within
  it, or idles that long between requests, is closed (aiohttp's keep-alive timer, which
  also runs from the moment a connection opens).
- ``connection_cap()``: at most that many open connections (256, and never more than a
  quarter of the process's file limit). When a new one arrives at the cap, the
  longest-open idle connection is closed to make room, so a flood of idle sockets cannot
  lock out a Prometheus scrape or a health check: the newest connection always gets in.
- ``HttpLog``: what aiohttp would log about a malformed request (with the raw request
  line or header, a token included, in its traceback) becomes one ``http_bad_request``
  line naming only the peer and the kind of error, at most ``BURST`` per minute with the
  rest counted (``steamedge_guard_events_total{component="http"}``).
"""

from __future__ import annotations

import re
import resource
from typing import Any

from aiohttp import web

from edge.logs import TALLY, Limited, get_logger

__all__ = ["IDLE_TIMEOUT", "HttpLog", "connection_cap", "make_runner"]

IDLE_TIMEOUT = 15.0  # s: to send a request's headers, and between requests
MAX_CONNECTIONS = 256
BURST = 5  # lines per minute per kind of HTTP trouble
_WORDS = re.compile(r"[A-Za-z][A-Za-z ,'-]{0,60}")


def connection_cap() -> int:
    """256, or a quarter of the soft open-file limit if that is smaller (at least 8)."""
    try:
        soft, _ = resource.getrlimit(resource.RLIMIT_NOFILE)
    except (OSError, ValueError):
        return MAX_CONNECTIONS
    if soft == resource.RLIM_INFINITY or soft <= 0:
        return MAX_CONNECTIONS
    return max(8, min(MAX_CONNECTIONS, soft // 4))


def _kind(exc: BaseException | None) -> str:
    """The first words of an error's message: what went wrong, never the bytes at fault
    (aiohttp puts the offending header or request line after a colon)."""
    if exc is None:
        return "unknown"
    text = str(getattr(exc, "message", "") or "")
    match = _WORDS.match(text.split(":")[0].strip()) if text else None
    return match.group(0).strip() if match else type(exc).__name__


class HttpLog:
    """The ``logger`` aiohttp's request handler writes to: one short line per problem,
    rate-limited, with no request data in it."""

    def __init__(self) -> None:
        self._limited = Limited(get_logger(component="http"), window=60.0, burst=BURST)

    def isEnabledFor(self, _level: int) -> bool:
        return True

    def debug(self, *_args: Any, **_kw: Any) -> None:
        pass  # aiohttp's debug lines (client went away, non-HTTP bytes) are not news

    def info(self, *_args: Any, **_kw: Any) -> None:
        pass

    def _line(self, level: str, args: tuple[Any, ...], kw: dict[str, Any]) -> None:
        exc = kw.get("exc_info")
        exc = exc if isinstance(exc, BaseException) else None
        status = getattr(exc, "code", None) or 500
        peer = args[1] if len(args) > 1 and isinstance(args[1], str) else None
        bad = isinstance(status, int) and 400 <= status < 500
        event = "http_bad_request" if bad else "http_server_error"
        TALLY.add("http", "bad_request" if bad else "server_error")
        self._limited(
            "warning" if bad else level,
            event,
            peer=peer,
            status=status,
            error=type(exc).__name__ if exc else None,
            detail=_kind(exc) if exc else str(args[0])[:80] if args else None,
        )

    def warning(self, *args: Any, **kw: Any) -> None:
        self._line("warning", args, kw)

    def error(self, *args: Any, **kw: Any) -> None:
        self._line("error", args, kw)

    def exception(self, *args: Any, **kw: Any) -> None:
        self._line("error", args, kw)


class _Cap:
    """Wraps a web.Server's ``connection_made`` to hold the connection cap."""

    def __init__(self, server: web.Server, limit: int) -> None:
        self._server = server
        self._limit = limit
        self._made = server.connection_made
        self._limited = Limited(get_logger(component="http"), window=60.0, burst=1)
        server.connection_made = self  # type: ignore[method-assign]

    def __call__(self, handler: Any, transport: Any) -> None:
        self._made(handler, transport)
        open_now = self._server.connections
        if len(open_now) <= self._limit:
            return
        # the oldest idle one goes (dicts keep insertion order: oldest first); a request
        # being answered is left to finish
        idle = [h for h in open_now if h is not handler and h.transport and not _busy(h)]
        victim = idle[0] if idle else handler
        victim.force_close()
        TALLY.add("http", "connection_closed_at_cap")
        self._limited(
            "warning",
            "http_connection_cap",
            limit=self._limit,
            detail="too many open connections: the longest-idle one was closed",
        )


def _busy(handler: Any) -> bool:
    # aiohttp keeps this flag while a request is being handled (no public accessor)
    return bool(getattr(handler, "_request_in_progress", False))


class _Runner(web.AppRunner):
    def __init__(self, app: web.Application, *, cap: int, **kw: Any) -> None:
        super().__init__(app, **kw)
        self._cap = cap

    async def _make_server(self) -> web.Server:
        server = await super()._make_server()
        _Cap(server, self._cap)
        return server


def make_runner(
    app: web.Application, *, cap: int | None = None, idle_timeout: float = IDLE_TIMEOUT
) -> web.AppRunner:
    """An AppRunner with the timeouts, the connection cap and the quiet log; no access
    log (requests are not logged at all)."""
    return _Runner(
        app,
        cap=cap if cap is not None else connection_cap(),
        access_log=None,
        shutdown_timeout=1.0,
        keepalive_timeout=idle_timeout,
        logger=HttpLog(),
        max_line_size=8190,
        max_field_size=8190,
    )
