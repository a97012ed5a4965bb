"""The /api/v1 handlers: points, alarms, events, operator actions and reload.

Reads are plain JSON views of the monitor's live state; writes (already authenticated by
``edge.web.app.guard``) turn a JSON body into an operator action on the alarm engine,
which the monitor journals before answering.
"""

from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Awaitable, Callable
from datetime import datetime
from typing import TYPE_CHECKING, Any

from aiohttp import web

from edge import units
from edge.alarms.definitions import display
from edge.alarms.messages import render as render_message
from edge.errors import (
    BadOperatorText,
    ConfigError,
    OperatorError,
    StorageError,
    UnitError,
    UnknownAlarm,
)
from edge.model import PRIORITIES, AlarmEvent, Hint, PointState, Reading
from edge.notify.base import iso_utc
from edge.web.port import MonitorPort

if TYPE_CHECKING:
    from edge.alarms.definitions import AlarmDef
    from edge.alarms.state import AlarmState

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


# the SI unit of an alarm's value by the quantity of its signal
_SI_UNITS = {
    "pressure": "Pa",
    "temperature": "K",
    "tdiff": "K",
    "enthalpy": "J/kg",
    "entropy": "J/(kg K)",
    "density": "kg/m3",
}


def _t(t: float | None) -> str | None:
    """Every time in the API: RFC 3339 in UTC with milliseconds."""
    return iso_utc(t) if t is not None and math.isfinite(t) else None


def _quantity(value: float | None, definition: AlarmDef | None) -> dict[str, Any] | None:
    """An alarm value or limit in SI (in the alarm's frame: a pressure in the reference its
    limit was written in) and in the alarm's display unit, each with its unit string."""
    v = _finite(value)
    if v is None:
        return None
    out: dict[str, Any] = {"value": v, "unit": ""}
    if definition is None:
        return out
    unit = _SI_UNITS.get(getattr(definition, "quantity", ""), "")
    if getattr(definition, "kind", "") == "rate" and unit:
        unit += "/min"
    out["unit"] = unit
    if getattr(definition, "reference", None):
        out["reference"] = definition.reference
    if getattr(definition, "unit_label", ""):
        try:
            shown = display(v, definition)
        except (UnitError, ValueError, KeyError):
            return out
        if getattr(definition, "kind", "") == "rate" and definition.direction == "falling":
            shown = -shown
        out["display"] = {"value": round(shown, 6), "unit": definition.unit_label}
    return out


def alarm_json(
    name: str, state: AlarmState, definition: AlarmDef | None, hint: str | None = None
) -> dict[str, Any]:
    """One alarm: its ISA-18.2 state, what happened when it came in (kept), the live value
    apart, the acknowledgement apart, values in SI and display units, RFC 3339 times."""
    s = state
    standing = bool(s.active or s.unacknowledged)
    live = render_message(definition, s.value, s.quality, hint) if definition else ""
    d: dict[str, Any] = {
        "name": name,
        "priority": s.priority,
        "state": s.state,
        "active": s.active,
        "unacknowledged": s.unacknowledged,
        "latched": s.latched,
        "condition": s.condition,
        "shelved": bool(s.shelved),
        "shelved_until": _t(s.shelved_until),
        "shelved_oneshot": s.shelved_oneshot,
        "suppressed": s.suppressed,
        "suppressed_by": s.suppressed_by,
        "out_of_service": s.out_of_service,
        "reason": s.reason,
        "user": s.user,
        "since": _t(s.since),
        "active_since": _t(s.active_since),
        "value": _quantity(s.value, definition),
        "quality": s.quality,
        "message": s.in_message if standing and s.in_message else live,
        "live": {
            "value": _quantity(s.value, definition),
            "quality": s.quality,
            "message": live,
        },
        "activation": None,
        "acknowledged": None,
        "kind": getattr(definition, "kind", None),
        "signal": getattr(definition, "signal", None),
        "limit": _quantity(getattr(definition, "limit", None), definition),
        "builtin": getattr(definition, "builtin", None),
        "shelvable": bool(getattr(definition, "shelvable", True)),
    }
    if standing and s.in_time is not None:
        d["activation"] = {
            "time": _t(s.in_time),
            "value": _quantity(s.in_value, definition),
            "limit": _quantity(s.in_limit, definition),
            "quality": s.in_quality,
            "message": s.in_message,
        }
    if standing and s.ack_time is not None:
        d["acknowledged"] = {"time": _t(s.ack_time), "user": s.ack_user}
    return d


def event_json(e: AlarmEvent, definition: AlarmDef | None = None) -> dict[str, Any]:
    """One journal event: RFC 3339 time, value and limit in SI and display units."""
    d = dataclasses.asdict(e)
    d["time"] = _t(e.time)
    d["value"] = _quantity(e.value, definition)
    d["limit"] = _quantity(e.limit, definition)
    return d


def _parse_time(text: str) -> float:
    """An RFC 3339 time (a zone is required: 'Z' or an offset) as epoch seconds."""
    when = datetime.fromisoformat(text.strip())
    if when.tzinfo is None:
        raise ValueError("no time zone")
    return when.timestamp()


def _monitor(request: web.Request) -> MonitorPort:
    return request.app[MONITOR]


def _bad(code: str, detail: str, status: int = 400) -> web.Response:
    return web.json_response({"error": code, "detail": detail}, status=status)


async def list_points(request: web.Request) -> web.Response:
    m = _monitor(request)
    runtime = m.runtime
    snapshot = runtime.snapshot if runtime is not None else {}
    tags_of = runtime.plan.point_tags if runtime is not None else {}
    rows = []
    for name, p in sorted(m.points.items()):
        row = point_json(p)
        # when the oldest of the point's samples arrived: how old the figures are
        times = [snapshot[t].receive_time for t in tags_of.get(name, ()) if t in snapshot]
        row["time"] = _t(min(times)) if times else None
        rows.append(row)
    last = getattr(m, "last_evaluation", None)
    return web.json_response({"points": rows, "time": _t(last) if last else None})


async def list_alarms(request: web.Request) -> web.Response:
    m = _monitor(request)
    defs = m.alarm_defs
    hints = _hints(m)
    rows = [
        alarm_json(n, s, defs.get(n), hints.get(getattr(defs.get(n), "subject", "")))
        for n, s in sorted(m.alarm_states.items())
    ]
    return web.json_response({"alarms": rows, "health": _health(m)})


def _hints(m: MonitorPort) -> dict[str, str]:
    """The commissioning hint of each point of the last pass (saturation messages)."""
    light = getattr(m.runtime, "light", None) or {}
    return {name: h for name, p in light.items() if (h := p.hint_text)}


def _health(m: MonitorPort) -> dict[str, Any] | None:
    """Alarm-system health (rates, flood, chattering, stale, top 10, causes standing and
    the alarms suppressed by them); None without a journal."""
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
    kw: dict[str, Any] = {}
    if request.query.get("from"):
        try:
            kw["from_time"] = _parse_time(request.query["from"])
        except ValueError:
            return _bad("bad_query", "from must be an RFC 3339 time, e.g. 2026-05-01T06:00:00Z")
    if request.query.get("alarm"):
        kw["alarm"] = request.query["alarm"]
    m = _monitor(request)
    events = m.events(since, limit, **kw)
    defs = m.alarm_defs
    rows = [event_json(e, defs.get(e.alarm)) for e in events]
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
    defs = m.alarm_defs
    out: dict[str, Any] = {"events": [event_json(e, defs.get(e.alarm)) for e in events]}
    if state is not None:
        d = defs.get(target)
        out["alarm"] = alarm_json(target, state, d, _hints(m).get(getattr(d, "subject", "")))
    return web.json_response(out)


def _alarm_action(kind: str) -> Callable[[web.Request], Awaitable[web.Response]]:
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
