"""Points: absolute pressure, Tsat, superheat, deviation, properties, hints. Pure.

``compile_points(config)`` resolves each point's tags once (names, pressure reference and
units) into a :class:`PointSpec`; ``evaluate(specs, snapshot, barometer)`` turns a TagStore
snapshot into one :class:`edge.model.PointState` per point. It never raises on plant data:
NaN, infinity, a negative absolute pressure or a state outside IF97 come back as readings
of quality ``bad`` with a reason.

Readings (SI, keyed by ``edge.model.POINT_QUANTITIES``):

* ``pressure`` absolute Pa: the tag value itself (``absolute``), value + barometer
  (``gauge``) or barometer - value (``vacuum``);
* ``temperature`` K; ``tsat`` K (IF97 equation 31 at the absolute pressure);
* ``superheat`` K = temperature - tsat (negative: subcooled);
* ``deviation`` K = |superheat|, on saturated points only;
* ``enthalpy`` J/kg, ``entropy`` J/(kg K), ``density`` kg/m3 (only with ``properties=True``):
  on a *saturated* point these are the properties of **saturated vapour** at the measured
  pressure (steam leaving a drum or in a saturated main, what a steam flow calculation
  wants); on superheated and subcooled points they are the single-phase properties at the
  measured (p, T), in whichever phase (p, T) says the fluid is. A (p, T) on the saturation
  line itself gives reason ``two_phase``.

Quality: each reading carries the worst quality of the inputs it depends on (pressure
sample, barometer when the reference is gauge or vacuum, temperature sample); the point's
quality is the worst of all its inputs. A missing tag is ``bad`` / ``no_data``; a pressure
outside the saturation line (611.213 Pa .. 22.064 MPa) makes tsat, everything after it and
the point ``bad`` / ``outside_if97``. With ``properties=False`` the three property keys are
left out; a quantity that does not apply (deviation off a saturated point, temperature on
a point without a temperature tag) is a ``bad`` reading with reason ``not_applicable`` or
``config``.

Commissioning hints: on a saturated point whose deviation exceeds its tolerance (or whose
pressure comes out impossible), ``edge.derive.hints`` replays the raw values under the usual
configuration mistakes and ``PointState.hint`` names the one that makes the temperature
agree, e.g. "the temperature agrees if drum_p reads gauge pressure, not absolute: set
reference: gauge". Correct data gives no hint.

Speed: ``evaluate`` runs every point of every tick, so the common case (both samples good,
pressure on the saturation line, no hint) takes an inline path that allocates only the
readings it returns (the fast builders are in ``edge.derive.build``); every other case
goes through ``_general``, which the tests hold the inline path to. Measure with
``python tests/bench/derive.py``.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from edge import config, units
from edge.derive import build as derive_objects
from edge.derive import hints
from edge.derive.build import bad, point_state, reading
from edge.errors import ConfigError, ConfigProblem, SteamError, TwoPhaseState, UnitError
from edge.model import (
    CONFIG,
    NO_DATA,
    NOT_A_NUMBER,
    OUT_OF_RANGE,
    OUTSIDE_IF97,
    POINT_QUANTITIES,
    BarometerReading,
    Level,
    PointState,
    Quality,
    Reading,
    Sample,
)
from edge.steam import PSAT_MAX, PSAT_MIN, saturated_vapour, tsat_unchecked
from edge.steam import properties as steam_properties

__all__ = ["TWO_PHASE", "PointSpec", "compile_points", "evaluate"]

TWO_PHASE = "two_phase"  # (p, T) on the saturation line: single-phase properties undefined
NOT_APPLICABLE = "not_applicable"  # e.g. deviation on a point that is not saturated
BAROMETER_BAD = "barometer_bad"
REFERENCES = hints.REFERENCES

_BAD = Level.BAD


@dataclass(frozen=True, slots=True)
class PointSpec:
    """One point, with its tags resolved. Built once per config by ``compile_points``."""

    name: str
    state: str  # saturated | superheated | subcooled
    tolerance: float  # K, allowed |T - Tsat| on a saturated point
    pressure_tag: str
    reference: str  # absolute | gauge | vacuum: how the pressure tag reads
    temperature_tag: str | None = None
    pressure_unit: str = "Pa"  # engineering unit of the pressure tag, for hints
    temperature_unit: str = "K"  # engineering unit of the temperature tag, for hints


def compile_points(cfg: config.Config) -> list[PointSpec]:
    """Resolve every point's tags. Raises ConfigError listing every unresolvable point."""
    tags = cfg.tags()
    problems: list[ConfigProblem] = []
    specs: list[PointSpec] = []
    for i, point in enumerate(cfg.points):
        ptag = tags.get(point.pressure)
        if ptag is None:
            problems.append(ConfigProblem(f"points[{i}].pressure", f"no tag {point.pressure!r}"))
            continue
        if ptag.reference is None:
            problems.append(
                ConfigProblem(
                    f"points[{i}].pressure",
                    f"tag {ptag.name!r} has no reference: set absolute, gauge or vacuum",
                )
            )
            continue
        t_unit = "K"
        if point.temperature is not None:
            ttag = tags.get(point.temperature)
            if ttag is None:
                problems.append(
                    ConfigProblem(f"points[{i}].temperature", f"no tag {point.temperature!r}")
                )
                continue
            t_unit = _canonical(ttag.unit, "temperature")
        specs.append(
            PointSpec(
                name=point.name,
                state=point.state,
                tolerance=point.tolerance,
                pressure_tag=ptag.name,
                reference=ptag.reference,
                temperature_tag=point.temperature,
                pressure_unit=_canonical(ptag.unit, "pressure"),
                temperature_unit=t_unit,
            )
        )
    if problems:
        raise ConfigError(problems)
    return specs


def _canonical(unit: str, kind: str) -> str:
    """The canonical symbol of a tag's unit (``"psig"`` -> ``"psi"``), for hints."""
    try:
        return units.unit_info(unit, kind).symbol
    except UnitError:
        return unit


_UNITS = dict(
    zip(POINT_QUANTITIES, ("Pa", "K", "K", "K", "K", "J/kg", "J/(kg K)", "kg/m3"), strict=True)
)
_PROPERTY_KEYS = ("enthalpy", "entropy", "density")
_NOT_APPLICABLE_DEVIATION = Reading(None, bad(NOT_APPLICABLE), "K")


def evaluate(
    specs: list[PointSpec],
    snapshot: Mapping[str, Sample],
    barometer: BarometerReading,
    *,
    properties: bool = True,
) -> dict[str, PointState]:
    """Every point's state from one snapshot and one barometric reading. Never raises on
    plant data. ``properties=False`` skips enthalpy/entropy/density (the light path)."""
    baro = barometer.value
    bq = barometer.quality
    if not (isinstance(baro, float | int) and math.isfinite(baro) and baro > 0.0):
        baro, bq = math.nan, bad(BAROMETER_BAD)
    elif bq.level is _BAD:
        baro = math.nan
    out: dict[str, PointState] = {}
    get = snapshot.get
    new, rv, rq, ru = (
        derive_objects.new_object,
        derive_objects.set_value,
        derive_objects.set_quality,
        derive_objects.set_unit,
    )
    for spec in specs:
        # The common case inline: both samples present and usable, pressure on the
        # saturation line, no hint needed. Everything else goes to _general, which handles
        # every case and is the reference the tests hold this path to.
        ps = get(spec.pressure_tag)
        tname = spec.temperature_tag
        tsample = get(tname) if tname is not None else None
        if ps is None or tsample is None:
            out[spec.name] = _general(spec, snapshot, baro, bq, properties)
            continue
        pq = ps.quality
        tq = tsample.quality
        ref = spec.reference
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
            or not 0.0 < t < math.inf
        ):
            out[spec.name] = _general(spec, snapshot, baro, bq, properties)
            continue
        ts = tsat_unchecked(p)
        q = tq if tq.level < pq.level else pq
        sh = t - ts
        if spec.state == "saturated":
            dev = sh if sh >= 0.0 else -sh
            if dev > spec.tolerance:  # a hint to look for: rare, take the long way
                out[spec.name] = _general(spec, snapshot, baro, bq, properties)
                continue
            deviation = new(Reading)
            rv(deviation, dev)
            rq(deviation, q)
            ru(deviation, "K")
        else:
            deviation = _NOT_APPLICABLE_DEVIATION
        # the readings built inline (as derive_objects.reading does): the hot path
        r_p = new(Reading)
        rv(r_p, p)
        rq(r_p, pq)
        ru(r_p, "Pa")
        r_t = new(Reading)
        rv(r_t, t)
        rq(r_t, tq)
        ru(r_t, "K")
        r_ts = new(Reading)
        rv(r_ts, ts)
        rq(r_ts, pq)
        ru(r_ts, "K")
        r_sh = new(Reading)
        rv(r_sh, sh)
        rq(r_sh, q)
        ru(r_sh, "K")
        readings = {
            "pressure": r_p,
            "temperature": r_t,
            "tsat": r_ts,
            "superheat": r_sh,
            "deviation": deviation,
        }
        if properties:
            _add_properties(readings, spec, p, t, pq, q)
        out[spec.name] = point_state(spec.name, spec.state, readings, q, None)
    return out


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
    p = hints.absolute(raw, ref, baro)
    if not 0.0 < p < math.inf:
        return math.nan, bad(OUT_OF_RANGE)
    return p, q


def _temperature(sample: Sample | None) -> tuple[float, Quality]:
    """(K, quality); the value is NaN when the quality is bad."""
    t, q = _value(sample)
    if q.level is not _BAD and not t > 0.0:
        return math.nan, bad(OUT_OF_RANGE)
    return t, q


def _general(
    spec: PointSpec,
    snapshot: Mapping[str, Sample],
    baro: float,
    bq: Quality,
    with_properties: bool,
) -> PointState:
    """One point, every case: missing or bad inputs, impossible pressures, hints."""
    saturated = spec.state == "saturated"
    p, pq = _pressure(spec, snapshot.get(spec.pressure_tag), baro, bq)
    ts = math.nan
    sq = pq  # quality of everything that follows from the pressure
    if pq.level is not _BAD:
        if PSAT_MIN <= p <= PSAT_MAX:
            ts = tsat_unchecked(p)
        else:
            sq = bad(OUTSIDE_IF97)
    if spec.temperature_tag is None:
        t, tq = math.nan, bad(CONFIG)
        quality = sq
    else:
        t, tq = _temperature(snapshot.get(spec.temperature_tag))
        quality = tq if tq.level < sq.level else sq
    readings = {
        "pressure": reading(p if pq.level is not _BAD else None, pq, "Pa"),
        "temperature": reading(t if tq.level is not _BAD else None, tq, "K"),
        "tsat": reading(ts if sq.level is not _BAD else None, sq, "K"),
    }
    hint_text = None
    shq = tq if tq.level < sq.level else sq
    if shq.level is _BAD:
        readings["superheat"] = reading(None, shq, "K")
        readings["deviation"] = reading(None, shq, "K")
        if saturated and tq.level is not _BAD and sq.reason in (OUT_OF_RANGE, OUTSIDE_IF97):
            hint_text = _hint_from(spec, snapshot, baro, t)
    else:
        sh = t - ts
        dev = abs(sh)
        readings["superheat"] = reading(sh, shq, "K")
        readings["deviation"] = reading(dev, shq, "K")
        if saturated and dev > spec.tolerance:
            hint_text = _hint_from(spec, snapshot, baro, t)
    if not saturated:
        readings["deviation"] = _NOT_APPLICABLE_DEVIATION
    if with_properties:
        if sq.level is _BAD:
            _fail_properties(readings, sq)
        else:
            _add_properties(readings, spec, p, t if tq.level is not _BAD else None, pq, shq)
    return point_state(spec.name, spec.state, readings, quality, hint_text)


def _add_properties(
    readings: dict[str, Reading],
    spec: PointSpec,
    p: float,
    t: float | None,
    pq: Quality,
    q: Quality,
) -> None:
    """Enthalpy, entropy, density: saturated vapour at p on saturated points, else at (p, T).
    ``pq`` is the pressure's quality, ``q`` the worst of pressure and temperature."""
    try:
        if spec.state == "saturated":
            props, q = saturated_vapour(p), pq
        elif t is None:
            _fail_properties(readings, q if q.level is _BAD else bad(CONFIG))
            return
        else:
            props = steam_properties(p, t)
    except TwoPhaseState:
        _fail_properties(readings, bad(TWO_PHASE))
        return
    except SteamError:
        _fail_properties(readings, bad(OUTSIDE_IF97))
        return
    readings["enthalpy"] = reading(props.h, q, "J/kg")
    readings["entropy"] = reading(props.s, q, "J/(kg K)")
    readings["density"] = reading(props.density, q, "kg/m3")


def _fail_properties(readings: dict[str, Reading], quality: Quality) -> None:
    for k in _PROPERTY_KEYS:
        readings[k] = reading(None, quality, _UNITS[k])


def _hint_from(
    spec: PointSpec, snapshot: Mapping[str, Sample], baro: float, t: float
) -> str | None:
    sample = snapshot.get(spec.pressure_tag)
    if sample is None or not sample.usable:
        return None
    return hints.find(spec, sample.value, t, baro)
