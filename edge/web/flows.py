"""Flows in the API: ``GET /api/v1/flows`` and ``POST /api/v1/flows/{name}/reset``, and the
JSON shape of one flow (also what ``steam-edge flow --json`` prints for its figures).

Every figure is SI as ``{"value": ..., "unit": ...}``, or null when it cannot be vouched for
(bad quality: the quality and reason say why)."""

from __future__ import annotations

import math
from typing import Any

from aiohttp import web

from edge.alarms.text import BadOperatorText
from edge.web.api import MONITOR, _body, _text, event_json
from edge.web.port import MonitorPort

__all__ = ["add_flow_routes", "flow_json", "flow_texts", "limits_json", "live_flows", "si"]


def si(value: float | None, unit: str) -> dict[str, Any] | None:
    """``{"value": v, "unit": u}`` for a finite value, else None."""
    if value is None or not math.isfinite(value):
        return None
    return {"value": value, "unit": unit}


def limits_json(result: Any) -> list[dict[str, Any]]:
    return [
        {
            "name": lim.name,
            "value": lim.value if math.isfinite(lim.value) else None,
            "low": lim.low,
            "high": lim.high,
            "ok": lim.ok,
            "clause": lim.clause,
        }
        for lim in (result.limits if result is not None else ())
    ]


def flow_json(name: str, spec: Any, state: Any, totals: Any) -> dict[str, Any]:
    """One flow: what it measures, this pass's figures, the limits and the totals."""
    q = state.quality if state is not None else None
    usable = state is not None and state.usable
    fluid = state.fluid if state is not None else None
    result = state.result if state is not None else None
    out: dict[str, Any] = {
        "name": name,
        "meter": spec.meter,
        "point": spec.point,
        "quality": q.name if q is not None else "bad",
        "reason": q.reason if q is not None else "no_data",
        "mass_flow": si(state.mass_flow, "kg/s") if usable else None,
        "energy_rate": si(state.energy_rate, "W") if usable else None,
        "density": si(fluid.density, "kg/m3") if fluid is not None and usable else None,
        "viscosity": si(fluid.viscosity, "Pa s") if fluid is not None and usable else None,
        "isentropic_exponent": (
            si(fluid.kappa, "1") if fluid is not None and usable and fluid.kappa else None
        ),
        "limits": limits_json(result),
    }
    if result is not None and usable:
        out["discharge_coefficient"] = si(result.discharge_coefficient, "1")
        out["expansibility"] = si(result.expansibility, "1")
        out["reynolds"] = si(result.reynolds, "1")
        out["differential_pressure"] = si(state.dp, "Pa")
    if spec.fuel is not None:
        eff = state.efficiency if state is not None else None
        eq = state.efficiency_quality if state is not None else None
        out["efficiency"] = {
            "value": eff if eff is not None and eq is not None and eq.level > 0 else None,
            "unit": "1",
            "basis": spec.fuel.basis,
            "method": "direct",
        }
    if totals is not None:
        out["totals"] = {
            "mass": si(totals.mass, "kg"),
            "energy": si(totals.energy, "J"),
            "not_measured": si(totals.not_measured, "s"),
            "energy_not_measured": si(totals.energy_not_measured, "s"),
            "uncertain": si(totals.uncertain, "s"),
            "since": totals.since,
            "updated": totals.last_time,
        }
    return out


def _round(v: float | None, digits: int) -> float | None:
    return round(v, digits) if v is not None and math.isfinite(v) else None


_QUALITY_CODE = {"good": 2, "uncertain": 1, "bad": 0}


def live_flows(runtime: Any) -> dict[str, list[Any]]:
    """Each flow for the operator page's live stream, in display units: [mass flow t/h,
    energy rate kW, mass total t, energy total GJ, not measured s, quality code]; the rates
    are null while the flow is bad."""
    if runtime is None:
        return {}
    out: dict[str, list[Any]] = {}
    for name in sorted(runtime.plan.flows):
        f, t = runtime.flows.get(name), runtime.totals.get(name)
        usable = f is not None and f.usable
        out[name] = [
            _round(f.mass_flow * 3.6 if usable and f.mass_flow is not None else None, 4),
            _round(f.energy_rate / 1e3 if usable and f.energy_rate is not None else None, 1),
            _round(t.mass / 1e3 if t is not None else 0.0, 4),
            _round(t.energy / 1e9 if t is not None else 0.0, 4),
            _round(t.not_measured if t is not None else 0.0, 0),
            _QUALITY_CODE.get(f.quality.name, 0) if f is not None else 0,
        ]
    return out


def flow_texts(runtime: Any) -> dict[str, dict[str, Any]]:
    """What changes seldom: meter, point, quality and reason of each flow."""
    if runtime is None:
        return {}
    out = {}
    for name, spec in sorted(runtime.plan.flows.items()):
        f = runtime.flows.get(name)
        out[name] = {
            "meter": spec.meter,
            "point": spec.point,
            "quality": f.quality.name if f is not None else "bad",
            "reason": f.quality.reason if f is not None else "no_data",
        }
    return out


def _monitor(request: web.Request) -> MonitorPort:
    return request.app[MONITOR]


def all_flows(monitor: Any) -> list[dict[str, Any]]:
    runtime = monitor.runtime
    if runtime is None:
        return []
    specs = runtime.plan.flows
    return [
        flow_json(n, specs[n], runtime.flows.get(n), runtime.totals.get(n)) for n in sorted(specs)
    ]


async def list_flows(request: web.Request) -> web.Response:
    return web.json_response({"flows": all_flows(_monitor(request))})


async def reset_flow(request: web.Request) -> web.Response:
    m = _monitor(request)
    name = request.match_info["name"]
    body = await _body(request)
    user = _text(body, "user", required=True)
    comment = _text(body, "comment", required=False) or _text(body, "reason", required=False)
    try:
        event = await m.reset_flow(name, user=user, comment=comment)
    except BadOperatorText as exc:
        return web.json_response({"error": "bad_text", "detail": str(exc)}, status=400)
    except KeyError:
        return web.json_response(
            {"error": "unknown_flow", "detail": f"no flow named {name!r}"}, status=404
        )
    runtime = m.runtime
    spec = runtime.plan.flows[name]
    flow = flow_json(name, spec, runtime.flows.get(name), runtime.totals.get(name))
    return web.json_response({"flow": flow, "event": event_json(event)})


def add_flow_routes(app: web.Application) -> None:
    app.router.add_get("/api/v1/flows", list_flows)
    app.router.add_post("/api/v1/flows/{name}/reset", reset_flow)
