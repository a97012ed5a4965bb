"""History routes: ``GET /api/v1/history`` (JSON), ``GET /api/v1/history.csv`` (the same
query for spreadsheets and shift reports) and ``GET /api/v1/saturation`` (the IF97
saturation line for the page's pressure-temperature chart).

Query: ``point=NAME&quantity=Q`` (repeat ``quantity`` for several; default pressure,
temperature, tsat and superheat) or ``tag=NAME``; ``since``/``until`` as RFC 3339 or
relative (``-10m``, ``-24h``, ``now``); ``step`` (``10s``, ``1min``) folds samples to that
step (min/mean/max). The answer also carries the alarm events and source up/down changes
of the same window, and each series' alarm limits. Queries run in a worker thread on a
read-only connection of their own.
"""

from __future__ import annotations

import asyncio
import csv
import io
import math
import time
from collections.abc import Mapping
from typing import Any

from aiohttp import web

from edge import steam, units
from edge.barometer import to_absolute
from edge.config.quantities import pressure_label
from edge.errors import HistoryQueryError, StorageError
from edge.history import (
    POINT_SERIES,
    HistoryReader,
    Series,
    parse_instant,
    parse_step,
    point_series,
    rfc3339,
)
from edge.model import LIMIT_CONDITIONS
from edge.web.api import _DISPLAY, MONITOR, event_json

__all__ = ["add_routes", "answer", "csv_text", "saturation_line"]

QUALITY = {0: "bad", 1: "uncertain", 2: "good"}
MAX_SPAN = 400 * 86400.0
LIMIT_KINDS = LIMIT_CONDITIONS


def _bad(detail: str, status: int = 400) -> web.Response:
    return web.json_response({"error": "bad_query", "detail": detail}, status=status)


def _display_of(monitor: Any, name: str, quantity: str | None) -> tuple[str, str, Any]:
    """(SI unit, display unit, SI -> display) for a point quantity or a tag."""
    if quantity is not None:
        unit, conv = _DISPLAY.get(quantity, ("", float))
        si = {"pressure": "Pa", "superheat": "K"}.get(quantity, "K")
        return si, unit, conv
    tag = monitor.config.tags().get(name)
    kind = units.unit_info(tag.unit).kind if tag is not None else ""
    if kind == "pressure":
        ref = getattr(tag, "reference", None)
        return "Pa", pressure_label("bar", ref), lambda v: v / 1e5
    if kind == "temperature":
        return "K", "degC", lambda v: v - units.ZERO_CELSIUS
    return "", "", float


def _round(v: float, digits: int = 6) -> float | None:
    return round(v, digits) if math.isfinite(v) else None


def _limits(monitor: Any, point: str, quantity: str, conv: Any) -> list[dict[str, Any]]:
    """High/low limits of alarms on ``point.quantity``, in its display unit (a pressure
    limit written gauge is drawn at gauge + the barometric value in use)."""
    out = []
    signal = point_series(point, quantity)
    baro = monitor.barometer
    for name, d in sorted(monitor.alarm_defs.items()):
        if d.signal != signal or d.kind not in LIMIT_KINDS or d.limit is None:
            continue
        limit = float(d.limit)
        if quantity == "pressure" and d.reference in ("gauge", "vacuum"):
            if baro is None:
                continue
            limit = to_absolute(limit, d.reference, baro.value)
        out.append(
            {"alarm": name, "kind": d.kind, "priority": d.priority, "display": _round(conv(limit))}
        )
    return out


def _wanted(q: Mapping[str, str]) -> list[tuple[str, str | None]]:
    """(series name, point quantity or None for a tag) asked for."""
    tags = _all(q, "tag")
    point = q.get("point")
    if point and tags:
        raise HistoryQueryError("ask for a point or a tag, not both")
    if tags:
        return [(t, None) for t in tags]
    if not point:
        raise HistoryQueryError("'point' (with 'quantity') or 'tag' is required")
    quantities = _all(q, "quantity") or list(POINT_SERIES)
    out = []
    for word in quantities:
        for quantity in word.split(","):
            if quantity not in POINT_SERIES:
                raise HistoryQueryError(
                    f"quantity must be one of {', '.join(POINT_SERIES)}, got {quantity!r}"
                )
            out.append((point_series(point, quantity), quantity))
    return out


def _all(q: Mapping[str, str], key: str) -> list[str]:
    getall = getattr(q, "getall", None)
    return list(getall(key, [])) if getall is not None else ([q[key]] if key in q else [])


def _window(q: Mapping[str, str], now: float) -> tuple[float, float, float | None]:
    since = parse_instant(q.get("since", "-1h"), now, "since")
    until = parse_instant(q.get("until", "now"), now, "until")
    step = parse_step(q["step"]) if q.get("step") else None
    if until <= since:
        raise HistoryQueryError("until must be later than since")
    if until - since > MAX_SPAN:
        raise HistoryQueryError("the window is longer than 400 days")
    return since, until, step


def answer(monitor: Any, query: Mapping[str, str]) -> dict[str, Any]:
    """The whole answer to a query (its words as in the URL) over anything with the
    monitor's read face: ``config``, ``history`` (path, ladder), ``journal``,
    ``alarm_defs``, ``barometer``, ``clock``. Runs in a worker thread for the API, and
    as it is for ``steam-edge history``. Raises HistoryQueryError or StorageError."""
    t0 = time.perf_counter()
    writer = monitor.history
    if writer is None:
        raise StorageError("history is disabled (storage.history.enabled: false)")
    now = monitor.clock()
    since, until, step = _window(query, now)
    wanted = _wanted(query)
    point = query.get("point")
    known = {p.name for p in monitor.config.points} | set(monitor.config.tags())
    for name, quantity in wanted:
        base = point if quantity is not None else name
        if base not in known:
            raise HistoryQueryError(f"no point or tag named {base!r}")
    reader = HistoryReader.open(writer.path, writer.ladder)
    try:
        series: list[tuple[str, str | None, Series | None]] = []
        for name, quantity in wanted:
            try:
                series.append((name, quantity, reader.query(name, since, until, step, now)))
            except HistoryQueryError:
                series.append((name, quantity, None))  # configured, nothing stored yet
        changes = reader.source_changes(since, until)
    finally:
        reader.close()
    events = []
    if monitor.journal is not None:
        events = [event_json(e) for e in monitor.journal.events_between(since, until)]
    out_series = []
    for name, quantity, s in series:
        si, unit, conv = _display_of(monitor, name, quantity)
        item: dict[str, Any] = {
            "name": name,
            "point": point if quantity else None,
            "quantity": quantity,
            "tag": None if quantity else name,
            "unit": si,
            "display_unit": unit,
            "resolution": "every pass",
            "step": 0,
            "aggregated": False,
            "samples": [],
            "limits": _limits(monitor, point, quantity, conv) if point and quantity else [],
        }
        if s is not None:
            item.update(
                resolution=s.tier.label
                if not s.aggregated or s.step == s.tier.step
                else f"{s.step:g} s",
                step=s.step,
                aggregated=s.aggregated,
                samples=_samples(s, conv, compact=query.get("format") == "compact"),
            )
        out_series.append(item)
    return {
        "since": rfc3339(since),
        "until": rfc3339(until),
        "series": out_series,
        "alarms": events,
        "sources": [
            {
                "time": rfc3339(c.time),
                "t": c.time,
                "source": c.source,
                "up": c.up,
                "detail": c.detail,
            }
            for c in changes
        ],
        "server_ms": round((time.perf_counter() - t0) * 1000, 2),
    }


def _samples(s: Series, conv: Any, *, compact: bool) -> list[Any]:
    run = s.run
    out: list[Any] = []
    if compact:  # [epoch s, mean, min, max, quality code] in display units, for the page
        off = conv(0.0)  # every display conversion is linear: scale and offset
        scale = conv(1.0) - off
        fl = math.floor  # floor(x * 1e5 + 0.5) / 1e5: 5 decimals, several times round()'s pace
        for t, mn, me, mx, q in zip(run.times, run.mins, run.means, run.maxs, run.quality,
                                    strict=True):  # fmt: skip
            out.append(
                [
                    fl(t * 1e3 + 0.5) / 1e3,
                    fl((me * scale + off) * 1e5 + 0.5) / 1e5 if me == me else None,  # NaN: none
                    fl((mn * scale + off) * 1e5 + 0.5) / 1e5 if mn == mn else None,
                    fl((mx * scale + off) * 1e5 + 0.5) / 1e5 if mx == mx else None,
                    q,
                ]
            )
        return out
    for i, t in enumerate(run.times):
        v = run.means[i]
        sample: dict[str, Any] = {
            "time": rfc3339(t),
            "value": _round(v, 9),
            "display": _round(conv(v)),
            "quality": QUALITY.get(run.quality[i], "none"),
        }
        if s.aggregated:
            sample["min"] = _round(run.mins[i], 9)
            sample["max"] = _round(run.maxs[i], 9)
            sample["display_min"] = _round(conv(run.mins[i]))
            sample["display_max"] = _round(conv(run.maxs[i]))
        out.append(sample)
    return out


async def _run(request: web.Request) -> dict[str, Any] | web.Response:
    monitor = request.app[MONITOR]
    try:
        return await asyncio.to_thread(answer, monitor, request.query)
    except HistoryQueryError as exc:
        return _bad(str(exc))
    except StorageError as exc:
        return web.json_response({"error": "history_unavailable", "detail": str(exc)}, status=503)


async def history_json(request: web.Request) -> web.Response:
    result = await _run(request)
    if isinstance(result, web.Response):
        return result
    return web.json_response(result)


async def history_csv(request: web.Request) -> web.Response:
    """One row per sample: time, series, value (SI), unit, display value and unit,
    min and max (folded samples), quality."""
    result = await _run(request)
    if isinstance(result, web.Response):
        return result
    name = (request.query.get("point") or request.query.get("tag") or "history").replace('"', "")
    return web.Response(
        text=csv_text(result),
        content_type="text/csv",
        charset="utf-8",
        headers={"Content-Disposition": f'attachment; filename="{name}-history.csv"'},
    )


CSV_HEADER = ("time", "series", "value", "unit", "display", "display_unit", "min", "max",
              "quality")  # fmt: skip


def csv_text(result: dict[str, Any]) -> str:
    """One row per sample of every series of an ``answer``."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\r\n")
    w.writerow(CSV_HEADER)
    for s in result["series"]:
        for x in s["samples"]:
            w.writerow([x["time"], s["name"], _csv(x["value"]), s["unit"], _csv(x["display"]),
                        s["display_unit"], _csv(x.get("min")), _csv(x.get("max")),
                        x["quality"]])  # fmt: skip
    return buf.getvalue()


def _csv(v: float | None) -> str:
    return "" if v is None else repr(v)


def saturation_line(n: int = 160) -> list[list[float]]:
    """[temperature degC, pressure bar(a)] along the IF97 saturation line from the triple
    point to near the critical point, spaced evenly in temperature."""
    lo, hi = 273.16, 647.0
    out = []
    for i in range(n):
        t = lo + (hi - lo) * i / (n - 1)
        out.append([round(t - units.ZERO_CELSIUS, 3), round(steam.psat(t) / 1e5, 7)])
    return out


_SATURATION: list[list[float]] = []


async def saturation(request: web.Request) -> web.Response:
    if not _SATURATION:
        _SATURATION.extend(saturation_line())
    return web.json_response(
        {
            "source": "IAPWS-IF97 region 4 (edge.steam.psat)",
            "unit": ["degC", "bar(a)"],
            "line": _SATURATION,
        },
        headers={"Cache-Control": "max-age=86400"},
    )


def add_routes(app: web.Application) -> None:
    app.router.add_get("/api/v1/history", history_json)
    app.router.add_get("/api/v1/history.csv", history_csv)
    app.router.add_get("/api/v1/saturation", saturation)
