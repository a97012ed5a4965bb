"""The evaluation pass: every point of a snapshot, the common case inline. Pure.

``evaluate(specs, snapshot, barometer)`` gives one ``PointState`` per point; ``step`` does
the same and also judges commissioning hints from a window of evidence that it takes and
returns (the caller keeps it between passes, so derive holds no state of its own).

Speed: ``evaluate`` runs every point of every tick, so the common case (both samples good,
pressure on the saturation line, the temperature on the configured side of the point's
band around Tsat, no hint needed) takes an inline path that allocates only the readings it
returns (the fast builders are in ``edge.derive.build``); every other case goes through
``edge.derive.general``, which the tests hold the inline path to. Measure with
``python tests/bench/derive.py``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import edge.derive.build as derive_objects
import edge.derive.hints as hints
import edge.derive.phase as phase
from edge.derive.build import bad, point_state, reading
from edge.derive.general import (
    NOT_APPLICABLE_DEVIATION,
    general,
    properties_into,
    with_properties,
)
from edge.derive.spec import PointSpec
from edge.errors import SteamError
from edge.model import SATURATED, BarometerReading, Level, PointState, Quality, Reading, Sample
from edge.steam import (
    PSAT_MAX,
    PSAT_MIN,
    T_MAX5,
    properties_hsv,
    saturated_vapour_hsv,
    tsat_unchecked,
)

__all__ = ["BAROMETER_BAD", "add_properties", "evaluate", "step"]

BAROMETER_BAD = "barometer_bad"
_BAD = Level.BAD
_OK = {"saturated": phase.SAT_OK, "superheated": phase.SH_OK, "subcooled": phase.SC_OK}


def evaluate(
    specs: list[PointSpec],
    snapshot: Mapping[str, Sample],
    barometer: BarometerReading,
    *,
    properties: bool = True,
) -> dict[str, PointState]:
    """Every point's state from one snapshot and one barometric reading, without hints
    (those need a window of samples: :func:`step`). Never raises on plant data.
    ``properties=False`` skips enthalpy/entropy/density (the light path)."""
    return _run(specs, snapshot, barometer, properties)[0]


def add_properties(
    specs: list[PointSpec],
    points: Mapping[str, PointState],
    snapshot: Mapping[str, Sample],
    barometer: BarometerReading,
) -> dict[str, PointState]:
    """``points``, the result of a pass without properties over ``snapshot`` and
    ``barometer``, with enthalpy, entropy and density: what :func:`evaluate` with
    properties gives (the hints of ``points`` kept), without deriving the rest again. A
    full scrape at 10,000 tags asks this for 5,000 points."""
    baro, bq = _baro(barometer)
    out: dict[str, PointState] = {}
    for spec in specs:
        name = spec.name
        state = points.get(name)
        if state is None:
            out[name], _ = general(spec, snapshot, baro, bq, True)
        else:
            out[name] = with_properties(spec, state, snapshot, baro, bq)
    return out


def step(
    specs: list[PointSpec],
    snapshot: Mapping[str, Sample],
    barometer: BarometerReading,
    window: hints.Window,
    *,
    properties: bool = True,
) -> tuple[dict[str, PointState], hints.Window]:
    """:func:`evaluate` plus commissioning hints judged over ``window`` (the evidence of
    earlier passes); returns the points and the window for the next pass."""
    out, wanting = _run(specs, snapshot, barometer, properties)
    if not wanting and not window:
        return out, hints.EMPTY_WINDOW
    by_name = {s.name: s for s in specs}
    baro = _baro(barometer)[0]
    new: dict[str, hints.Evidence] = {}
    for name, evidence in window.items():  # unusable inputs this pass: keep what was seen
        s = by_name.get(name)
        if s is not None and name not in wanting and not _inputs_usable(s, snapshot):
            new[name] = evidence
    if wanting:
        t_ok, p_ok = _vouched(specs, out, wanting)
        for name in wanting:
            s = by_name[name]
            raw = snapshot[s.pressure_tag].value
            t = out[name].readings["temperature"].value
            assert t is not None  # general() wants a hint only with a usable temperature
            evidence = hints.observe(s, window.get(name), raw, t, baro)
            new[name] = evidence
            hint = hints.judge(
                s,
                evidence,
                t_vouched=s.temperature_tag in t_ok,
                p_vouched=s.pressure_tag in p_ok,
            )
            if hint is not None:
                out[name] = out[name]._replace(hint=hint)
    return out, new


def _inputs_usable(spec: PointSpec, snapshot: Mapping[str, Sample]) -> bool:
    for tag in (spec.pressure_tag, spec.temperature_tag):
        s = snapshot.get(tag) if tag is not None else None
        if s is None or not s.usable:
            return False
    return True


def _vouched(
    specs: list[PointSpec], out: Mapping[str, PointState], wanting: set[str]
) -> tuple[set[str], set[str]]:
    """Temperature and pressure tags that a saturated point agreeing with the steam tables
    vouches for this pass (its T matches Tsat of its p: both read right)."""
    t_ok: set[str] = set()
    p_ok: set[str] = set()
    for s in specs:
        if s.state != SATURATED or s.name in wanting or s.temperature_tag is None:
            continue
        st = out[s.name]
        dev = st.readings.get("deviation")
        if st.phase == SATURATED and dev is not None and dev.usable:
            t_ok.add(s.temperature_tag)
            p_ok.add(s.pressure_tag)
    return t_ok, p_ok


def _baro(barometer: BarometerReading) -> tuple[float, Quality]:
    baro = barometer.value
    bq = barometer.quality
    if not (isinstance(baro, float | int) and math.isfinite(baro) and baro > 0.0):
        baro, bq = math.nan, bad(BAROMETER_BAD)
    elif bq.level is _BAD:
        baro = math.nan
    return baro, bq


_Row = tuple[PointSpec, str, str, "str | None", str, str, float, float]
_ROWS: list[tuple[tuple[PointSpec, ...], list[_Row]]] = []  # the last specs and their rows


def _rows(specs: list[PointSpec]) -> list[_Row]:
    """Each spec with the fields the inline path reads, as one tuple (unpacked at once
    instead of six attribute loads a point); made again only when the specs change (the
    check compares the very objects: ~20 us at 5,000 points)."""
    key = tuple(specs)
    if _ROWS and _ROWS[0][0] == key:
        return _ROWS[0][1]
    rows = [
        (s, s.name, s.pressure_tag, s.temperature_tag, s.reference, s.state, s.sat_band,
         s.tolerance)
        for s in specs
    ]  # fmt: skip
    _ROWS[:] = [(key, rows)]
    return rows


def _run(
    specs: list[PointSpec],
    snapshot: Mapping[str, Sample],
    barometer: BarometerReading,
    properties: bool,
) -> tuple[dict[str, PointState], set[str]]:
    baro, bq = _baro(barometer)
    out: dict[str, PointState] = {}
    wanting: set[str] = set()
    get = snapshot.get
    new = derive_objects.new_tuple  # Reading(v, q, u) is new(Reading, (v, q, u)), in C
    for spec, name, ptag, tname, ref, state, band, tolerance in _rows(specs):
        # The common case inline: both samples present and usable, pressure on the
        # saturation line, the temperature on the configured side of the band, no hint
        # needed. Everything else goes to general(), which handles every case and is the
        # reference the tests hold this path to.
        ps = get(ptag)
        tsample = get(tname) if tname is not None else None
        if ps is None or tsample is None:
            out[name], wants = general(spec, snapshot, baro, bq, properties)
            if wants:
                wanting.add(name)
            continue
        pq = ps.quality
        tq = tsample.quality
        if ref == "gauge":
            p = ps.value + baro
            if bq.level < pq.level:
                pq = bq
        elif ref == "absolute":
            p = ps.value
        elif ref == "vacuum":
            p = baro - ps.value
            if bq.level < pq.level:
                pq = bq
        else:
            p = math.nan
        t = tsample.value
        if (
            pq.level is _BAD
            or tq.level is _BAD
            or not PSAT_MIN <= p <= PSAT_MAX  # also false for NaN
            or not 0.0 < t <= T_MAX5
        ):
            out[name], wants = general(spec, snapshot, baro, bq, properties)
            if wants:
                wanting.add(name)
            continue
        ts = tsat_unchecked(p)
        q = tq if tq.level < pq.level else pq
        sh = t - ts
        if state == "saturated":
            dev = sh if sh >= 0.0 else -sh
            if dev > tolerance or dev > band:  # a hint to look for, or off the line
                out[name], wants = general(spec, snapshot, baro, bq, properties)
                if wants:
                    wanting.add(name)
                continue
            deviation = new(Reading, (dev, q, "K"))
        else:
            if not (sh >= band if state == "superheated" else sh <= -band):
                out[name], _ = general(spec, snapshot, baro, bq, properties)
                continue
            deviation = NOT_APPLICABLE_DEVIATION
        # the readings built inline (as derive_objects.reading does): the hot path
        readings = {
            "pressure": new(Reading, (p, pq, "Pa")),
            "temperature": new(Reading, (t, tq, "K")),
            "tsat": new(Reading, (ts, pq, "K")),
            "superheat": new(Reading, (sh, q, "K")),
            "deviation": deviation,
        }
        if properties:  # h, s, v with the Tsat at hand (a full scrape: every point)
            try:
                if state == "saturated":  # saturated vapour at p: the pressure's quality
                    h, s_, v = saturated_vapour_hsv(p, ts)
                    mq = pq
                else:
                    h, s_, v = properties_hsv(p, t, ts)
                    mq = q
            except SteamError:  # on the line, or outside IF97: the general wording
                properties_into(readings, _OK[state], p, t, pq, q)
            else:
                readings["enthalpy"] = reading(h, mq, "J/kg")
                readings["entropy"] = reading(s_, mq, "J/(kg K)")
                readings["density"] = reading(1.0 / v, mq, "kg/m3")
        out[name] = point_state(name, state, readings, q, None, state)
    return out, wanting
