"""The general path: one point, every case. Pure.

Missing or bad inputs, impossible pressures, points off their configured phase,
supercritical pressures: everything the inline path in ``edge.derive.fast`` hands over,
and the reference the tests hold that path to. :func:`general` also says whether the
point needs a commissioning hint judged (a saturated point outside its tolerance, or one
whose pressure comes out impossible); ``edge.derive.fast.step`` does the judging.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import edge.derive.phase as phase
from edge.barometer import to_absolute as absolute
from edge.derive.build import bad, point_state, reading
from edge.derive.spec import REFERENCES, PointSpec
from edge.errors import SteamError, TwoPhaseState
from edge.model import (
    CONFIG,
    NO_DATA,
    NOT_A_NUMBER,
    OUT_OF_RANGE,
    OUTSIDE_IF97,
    POINT_QUANTITIES,
    Level,
    PointState,
    Quality,
    Reading,
    Sample,
)
from edge.steam import (
    P_MAX,
    PSAT_MAX,
    PSAT_MIN,
    T_MAX5,
    properties_hsv,
    saturated_liquid,
    saturated_vapour_hsv,
    tsat_unchecked,
)

__all__ = ["NOT_APPLICABLE", "TWO_PHASE", "general", "properties_into", "with_properties"]

TWO_PHASE = "two_phase"  # (p, T) on the saturation line: single-phase properties undefined
NOT_APPLICABLE = "not_applicable"  # e.g. deviation on a point that is not saturated

_BAD = Level.BAD
UNITS = dict(
    zip(POINT_QUANTITIES, ("Pa", "K", "K", "K", "K", "J/kg", "J/(kg K)", "kg/m3"), strict=True)
)
PROPERTY_KEYS = ("enthalpy", "entropy", "density")
NOT_APPLICABLE_DEVIATION = Reading(None, bad(NOT_APPLICABLE), "K")
# a saturated point whose pressure comes out like this may be misconfigured: look for a hint
_HINT_REASONS = (OUT_OF_RANGE, OUTSIDE_IF97, phase.SUPERCRITICAL_REASON)


def _worse(a: Quality, b: Quality | None) -> Quality:
    return b if b is not None and b.level < a.level else a


def _value(sample: Sample | None) -> tuple[float, Quality]:
    """(value, quality) of a sample; NaN and a bad quality when it is missing, bad or not a
    finite number."""
    if sample is None:
        return math.nan, bad(NO_DATA)
    q = sample.quality
    if q.level is _BAD:
        return math.nan, q
    value = sample.value
    if not (isinstance(value, float | int) and math.isfinite(value)):
        return math.nan, bad(NOT_A_NUMBER)
    return value, q


def _pressure(
    spec: PointSpec, sample: Sample | None, baro: float, bq: Quality
) -> tuple[float, Quality]:
    """(absolute Pa, quality); the value is NaN when the quality is bad."""
    raw, q = _value(sample)
    if q.level is _BAD:
        return raw, q
    ref = spec.reference
    if ref not in REFERENCES:
        return math.nan, bad(CONFIG)
    if ref != "absolute":
        if bq.level is _BAD:
            return math.nan, bq
        if bq.level < q.level:
            q = bq
    p = absolute(raw, ref, baro)
    if not 0.0 < p < math.inf:
        return math.nan, bad(OUT_OF_RANGE)
    return p, q


def _temperature(sample: Sample | None) -> tuple[float, Quality]:
    """(K, quality); the value is NaN when the quality is bad. No thermometer on a steam
    plant reads above 2273.15 K (the top of IF97) or at or below 0 K: out_of_range."""
    t, q = _value(sample)
    if q.level is not _BAD and not 0.0 < t <= T_MAX5:
        return math.nan, bad(OUT_OF_RANGE)
    return t, q


def general(
    spec: PointSpec,
    snapshot: Mapping[str, Sample],
    baro: float,
    bq: Quality,
    with_properties: bool,
) -> tuple[PointState, bool]:
    """One point, every case, and whether it wants a commissioning hint judged."""
    saturated = spec.state == "saturated"
    p, pq = _pressure(spec, snapshot.get(spec.pressure_tag), baro, bq)
    ts = math.nan
    sq = pq  # quality of Tsat and what follows from it
    supercritical = False
    if pq.level is not _BAD:
        if PSAT_MIN <= p <= PSAT_MAX:
            ts = tsat_unchecked(p)
        elif PSAT_MAX < p <= P_MAX:
            supercritical, sq = True, bad(phase.SUPERCRITICAL_REASON)
        else:
            sq = bad(OUTSIDE_IF97)
    point_p = pq if supercritical else sq  # what the pressure does to the point's quality
    if spec.temperature_tag is None:
        t, tq = math.nan, bad(CONFIG)
        quality = point_p
    else:
        t, tq = _temperature(snapshot.get(spec.temperature_tag))
        quality = _worse(point_p, tq)
    have_t = tq.level is not _BAD
    if supercritical:
        judgement: phase.Judgement | None = phase.supercritical(spec.state, have_t)
    elif sq.level is _BAD:
        judgement = None
    else:
        judgement = phase.judge(spec.state, t - ts if have_t else None, spec.sat_band)
    if judgement is not None:
        quality = _worse(quality, judgement.point)
    readings = {
        "pressure": reading(p if pq.level is not _BAD else None, pq, "Pa"),
        "temperature": reading(t if have_t else None, tq, "K"),
        "tsat": reading(ts if sq.level is not _BAD else None, sq, "K"),
    }
    wants_hint = False
    shq = _worse(sq, tq)
    if shq.level is _BAD:
        readings["superheat"] = reading(None, shq, "K")
        readings["deviation"] = reading(None, shq, "K")
        wants_hint = saturated and have_t and sq.reason in _HINT_REASONS
    else:
        sh = t - ts
        dev = abs(sh)
        readings["superheat"] = reading(sh, shq, "K")
        readings["deviation"] = reading(dev, shq, "K")
        wants_hint = saturated and dev > spec.tolerance
    if not saturated:
        readings["deviation"] = NOT_APPLICABLE_DEVIATION
    if wants_hint:
        sample = snapshot.get(spec.pressure_tag)
        wants_hint = sample is not None and sample.usable
    if with_properties:
        if judgement is None:
            fail_properties(readings, sq)
        else:
            properties_into(readings, judgement, p, t, pq, _worse(pq, tq))
    return point_state(
        spec.name,
        spec.state,
        readings,
        quality,
        None,
        judgement.phase if judgement is not None else None,
    ), wants_hint


def properties_into(
    readings: dict[str, Reading],
    judgement: phase.Judgement,
    p: float,
    t: float,
    pq: Quality,
    mq: Quality,
    ts: float | None = None,
) -> None:
    """Enthalpy, entropy, density as the judgement says: at (p, T), of saturated vapour or
    liquid at p, or none. ``pq`` is the pressure's quality, ``mq`` the worst of pressure and
    temperature; the judgement's cap applies on top. ``ts``: Tsat at p when the caller has
    it (the steam tables then need not work it out again)."""
    kind = judgement.properties
    cap = judgement.quality
    try:
        if kind == phase.SINGLE:
            (h, s, v), q = properties_hsv(p, t, ts), mq
        elif kind == phase.VAPOUR:
            # saturated vapour on a saturated point depends on the pressure alone
            base = pq if judgement is phase.SAT_OK or judgement is phase.SAT_NO_T else mq
            (h, s, v), q = saturated_vapour_hsv(p, ts), _worse(base, cap)
        elif kind == phase.LIQUID:
            props, q = saturated_liquid(p), _worse(mq, cap)
            h, s, v = props.h, props.s, props.v
        else:
            if cap is None:
                cap = mq if mq.level is _BAD else bad(CONFIG)
            fail_properties(readings, cap)
            return
    except TwoPhaseState:
        fail_properties(readings, bad(TWO_PHASE))
        return
    except SteamError:
        fail_properties(readings, bad(OUTSIDE_IF97))
        return
    readings["enthalpy"] = reading(h, q, "J/kg")
    readings["entropy"] = reading(s, q, "J/(kg K)")
    readings["density"] = reading(1.0 / v, q, "kg/m3")


def with_properties(
    spec: PointSpec,
    state: PointState,
    snapshot: Mapping[str, Sample],
    baro: float,
    bq: Quality,
) -> PointState:
    """``state``, a point of a pass without properties, with enthalpy, entropy and density
    added as that pass with properties would have made them (same snapshot, same
    barometer): when its Tsat and temperature are usable, the judgement :func:`general`
    makes of them and :func:`properties_into`; otherwise the point made again by
    :func:`general`. The other readings, the quality, the phase and the hint are kept."""
    readings = state.readings
    r_p = readings.get("pressure")
    r_t = readings.get("temperature")
    r_ts = readings.get("tsat")
    if r_p is None or r_t is None or r_ts is None:
        p = t = ts = None
    else:
        p, t, ts = r_p.value, r_t.value, r_ts.value
    if p is None or t is None or ts is None or r_p is None or r_t is None:
        full, _ = general(spec, snapshot, baro, bq, True)
        readings = full.readings
    else:
        readings = dict(readings)
        judgement = phase.judge(spec.state, t - ts, spec.sat_band)
        pq = r_p.quality
        properties_into(readings, judgement, p, t, pq, _worse(pq, r_t.quality), ts)
    return point_state(state.name, state.state, readings, state.quality, state.hint, state.phase)


def fail_properties(readings: dict[str, Reading], quality: Quality) -> None:
    for k in PROPERTY_KEYS:
        readings[k] = reading(None, quality, UNITS[k])
