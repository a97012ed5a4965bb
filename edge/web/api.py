"""The /api/v1 handlers: points, alarms, events, operator actions and reload.

Reads are plain JSON views of the monitor's live state; writes (already authenticated by
``edge.web.app.guard``) turn a JSON body into an operator action on the alarm engine,
which the monitor journals before answering.
"""

from __future__ import annotations

import dataclasses
import json
import math
from typing import Any

from aiohttp import web

from edge import units
from edge.alarms.messages import render as render_message
from edge.errors import (
    BadOperatorText,
    ConfigError,
    OperatorError,
    StorageError,
    UnitError,
    UnknownAlarm,
)
from edge.model import Hint, PointState, Reading
from edge.web.port import MonitorPort

__all__ = ["MONITOR", "add_routes", "alarm_json", "event_json", "point_json"]

MONITOR: web.AppKey[MonitorPort] = web.AppKey("monitor", object)

# quantity -> (display unit, SI -> display)
_DISPLAY: dict[str, tuple[str, Any]] = {
    "pressure": ("bar(a)", lambda v: v / 1e5),
    "temperature": ("degC", lambda v: v - units.ZERO_CELSIUS),
    "tsat": ("degC", lambda v: v - units.ZERO_CELSIUS),
    "superheat": ("K", float),
    "deviation": ("K", float),
    "enthalpy": ("kJ/kg", lambda v: v / 1e3),
    "entropy": ("kJ/(kg K)", lambda v: v / 1e3),
    "density": ("kg/m3", float),
}
ACTIONS = {  # path word -> engine action kind
    "ack": "ack",
    "shelve": "shelve",
    "unshelve": "unshelve",
    "out-of-service": "out_of_service",
    "in-service": "in_service",
}
MAX_ID = 2**63 - 1  # SQLite's largest integer: event ids never exceed it
NEEDS_REASON = frozenset({"shelve", "out_of_service"})
PRIORITIES = ("critical", "high", "medium", "low")


def _finite(v: float | None) -> float | None:
    return v if v is not None and math.isfinite(v) else None


def _reading_json(quantity: str, r: Reading) -> dict[str, Any]:
    value = _finite(r.value) if r.usable else None
    out: dict[str, Any] = {
        "value": value,
        "unit": r.unit,
        "quality": r.quality.name,
        "reason": r.quality.reason,
    }
    if quantity in _DISPLAY and value is not None:
        unit, conv = _DISPLAY[quantity]
        out["display"] = {"value": round(conv(value), 6), "unit": unit}
    return out


def point_json(p: PointState) -> dict[str, Any]:
    return {
        "name": p.name,
        "state": p.state,
        "quality": p.quality.name,
        "reason": p.quality.reason,
        "phase": p.phase,
        "hint": p.hint_text,
        "hint_detail": p.hint.to_dict() if isinstance(p.hint, Hint) else None,
        "readings": {q: _reading_json(q, r) for q, r in p.readings.items()},
    }


def alarm_json(name: str, state: Any, definition: Any) -> dict[str, Any]:
    d = state.to_dict() if hasattr(state, "to_dict") else dataclasses.asdict(state)
    for key in ("condition", "pending_since", "clearing_since", "announced", "latched"):
        d.pop(key, None)
    d["value"] = _finite(d.get("value"))
    d["name"] = name
    d["shelved"] = bool(getattr(state, "shelved", False))
    if definition is not None:  # the message as an operator reads it, not its template
        d["message"] = render_message(definition, d["value"], str(d.get("quality", "good")))
    for attr in ("signal", "message", "kind", "limit"):
        value = getattr(definition, attr, None)
        if isinstance(value, str | int | float) and not isinstance(value, bool):
            d.setdefault(attr, _finite(value) if isinstance(value, float) else value)
    return d


def event_json(e: Any) -> dict[str, Any]:
    d = dataclasses.asdict(e)
    d["value"] = _finite(d.get("value"))
    d["limit"] = _finite(d.get("limit"))
    return d


def _monitor(request: web.Request) -> MonitorPort:
    return request.app[MONITOR]


def _bad(code: str, detail: str, status: int = 400) -> web.Response:
    return web.json_response({"error": code, "detail": detail}, status=status)


async def list_points(request: web.Request) -> web.Response:
    points = _monitor(request).points
    return web.json_response({"points": [point_json(p) for _, p in sorted(points.items())]})


async def list_alarms(request: web.Request) -> web.Response:
    m = _monitor(request)
    defs = m.alarm_defs
    rows = [alarm_json(n, s, defs.get(n)) for n, s in sorted(m.alarm_states.items())]
    return web.json_response({"alarms": rows, "health": _health(m)})


def _health(m: MonitorPort) -> dict[str, Any] | None:
    """Alarm-system health (rates, flood, chattering, stale, top 10); None without a
    journal."""
    try:
        health = m.alarm_health()
        return None if health is None else health.to_dict()
    except StorageError as exc:
        return {"error": "storage", "detail": str(exc)}


async def list_events(request: web.Request) -> web.Response:
    try:
        since = int(request.query.get("since", "0"))
        limit = int(request.query.get("limit", "100"))
    except ValueError:
        return _bad("bad_query", "since and limit must be whole numbers")
    if not 0 <= since <= MAX_ID or not 1 <= limit <= 1000:
        return _bad("bad_query", f"since must be 0..{MAX_ID} and limit between 1 and 1000")
    events = _monitor(request).events(since, limit)
    rows = [event_json(e) for e in events]
    nxt = rows[-1]["id"] if rows else since
    return web.json_response({"events": rows, "next": nxt})


async def _body(request: web.Request) -> dict[str, Any]:
    if not request.can_read_body:
        return {}
    try:
        data = json.loads(await request.read() or b"{}", parse_constant=_no_constant)
    except RecursionError as exc:
        raise web.HTTPBadRequest(text="the body is nested too deeply") from exc
    except (ValueError, UnicodeDecodeError) as exc:
        raise web.HTTPBadRequest(text=f"the body is not JSON: {str(exc)[:120]}") from exc
    if not isinstance(data, dict):
        raise web.HTTPBadRequest(text="the body must be a JSON object")
    return data


def _no_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number")


def _text(body: dict[str, Any], key: str, required: bool) -> str:
    value = body.get(key)
    if value is None or value == "":
        if required:
            raise web.HTTPBadRequest(text=f"'{key}' is required")
        return ""
    if not isinstance(value, str):
        raise web.HTTPBadRequest(text=f"'{key}' must be text")
    return value  # its characters and length are checked by the monitor (BadOperatorText)


def _duration(body: dict[str, Any]) -> float | None:
    value = body.get("duration")
    if value is None:
        return None
    try:
        seconds = units.parse_duration(value) if isinstance(value, str) else float(value)
    except (UnitError, TypeError, ValueError, OverflowError) as exc:
        raise web.HTTPBadRequest(text=f"'duration': {str(exc)[:120]}") from exc
    if not math.isfinite(seconds) or seconds <= 0:
        raise web.HTTPBadRequest(text="'duration' must be positive, e.g. '30 min'")
    return seconds


async def _act(request: web.Request, kind: str, target: str) -> web.Response:
    m = _monitor(request)
    body = await _body(request)
    user = _text(body, "user", required=True)
    reason = _text(body, "reason", required=False) or _text(body, "comment", required=False)
    if kind in NEEDS_REASON and not reason:
        raise web.HTTPBadRequest(text=f"'reason' is required to {kind.replace('_', ' ')}")
    duration = _duration(body) if kind == "shelve" else None
    try:
        state, events = await m.act(kind, target, user=user, comment=reason, duration=duration)
    except BadOperatorText as exc:
        return _bad("bad_text", str(exc))
    except UnknownAlarm as exc:
        return _bad("unknown_alarm", str(exc), 404)
    except OperatorError as exc:
        return _bad("not_allowed", str(exc), 409)
    out: dict[str, Any] = {"events": [event_json(e) for e in events]}
    if state is not None:
        out["alarm"] = alarm_json(target, state, m.alarm_defs.get(target))
    return web.json_response(out)


def _alarm_action(kind: str) -> Any:
    async def handler(request: web.Request) -> web.Response:
        return await _act(request, kind, request.match_info["name"])

    return handler


async def ack_priority(request: web.Request) -> web.Response:
    priority = request.match_info["priority"]
    if priority not in PRIORITIES:
        return _bad("unknown_priority", f"priority must be one of {', '.join(PRIORITIES)}", 404)
    return await _act(request, "ack_priority", priority)


async def reload(request: web.Request) -> web.Response:
    try:
        summary = await _monitor(request).reload()
    except ConfigError as exc:
        return web.json_response(
            {
                "error": "invalid_config",
                "detail": "the new config was rejected; the running one stays",
                "problems": [str(p) for p in exc.problems],
            },
            status=422,
        )
    return web.json_response({"status": "reloaded", **summary})


def add_routes(app: web.Application) -> None:
    app.router.add_get("/api/v1/points", list_points)
    app.router.add_get("/api/v1/alarms", list_alarms)
    app.router.add_get("/api/v1/events", list_events)
    for word, kind in ACTIONS.items():
        app.router.add_post(f"/api/v1/alarms/{{name}}/{word}", _alarm_action(kind))
    app.router.add_post("/api/v1/priorities/{priority}/ack", ack_priority)
    app.router.add_post("/api/v1/reload", reload)
    from edge.web.flows import add_flow_routes

    add_flow_routes(app)
