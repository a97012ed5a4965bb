"""The barometric pressure in use: fixed, from altitude, or a live tag with fallback. Pure.

``compile_barometer`` turns the ``barometer:`` section of the config into a
:class:`BarometerSpec` once; ``resolve`` picks the value for one evaluation from a TagStore
snapshot and the current time:

* a live tag is used when its sample exists, is usable (not bad, finite), arrived no more
  than ``max_age`` seconds ago (by the older of ``Sample.receive_time`` and
  ``Sample.source_time``, so a frozen source timestamp counts) and lies inside the plausible
  band (default 80-110 kPa absolute). An ``uncertain`` sample is used and keeps its quality;
* otherwise the configured fixed value or the standard-atmosphere value for the altitude
  is used, with quality ``uncertain`` and the reason the tag was refused:
  ``barometer_no_data``, ``barometer_bad``, ``barometer_stale`` or ``barometer_implausible``;
* with neither fixed value nor altitude configured, the fallback is the standard atmosphere
  at sea level, 101325 Pa, origin ``fixed``, always ``uncertain`` (``barometer_default``
  when there is no tag at all).
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from edge import config
from edge.errors import ConfigError, ConfigProblem
from edge.model import GOOD, BarometerReading, Level, Quality, Sample, uncertain

__all__ = [
    "DEFAULT_PLAUSIBLE",
    "STANDARD_ATMOSPHERE",
    "BarometerSpec",
    "compile_barometer",
    "resolve",
    "standard_atmosphere",
]

STANDARD_ATMOSPHERE = 101_325.0  # Pa, ICAO / ISO 2533 sea level
DEFAULT_PLAUSIBLE = (80_000.0, 110_000.0)  # Pa absolute
ALTITUDE_RANGE = (-500.0, 11_000.0)  # m: the troposphere formula below holds up to 11 km

NO_DATA = "barometer_no_data"
BAD = "barometer_bad"
STALE = "barometer_stale"
IMPLAUSIBLE = "barometer_implausible"
DEFAULT = "barometer_default"


def standard_atmosphere(altitude_m: float) -> float:
    """Pressure (Pa) at a geopotential altitude in the ICAO standard atmosphere (ISO 2533),
    troposphere: p = 101325 (1 - 2.25577e-5 h)^5.25588."""
    return STANDARD_ATMOSPHERE * (1.0 - 2.25577e-5 * altitude_m) ** 5.25588


@dataclass(frozen=True, slots=True)
class BarometerSpec:
    fallback: float  # Pa absolute: fixed value, altitude value, or 101325
    fallback_origin: str  # "fixed" | "altitude"
    configured: bool  # False when the fallback is the sea-level default
    tag: str | None
    max_age: float  # s
    low: float  # Pa, plausible band for the live tag
    high: float


def _absolute(q: object, path: str, problems: list[ConfigProblem]) -> float | None:
    value = getattr(q, "value", None)
    reference = getattr(q, "reference", None)
    if reference not in (None, "absolute"):
        problems.append(ConfigProblem(path, f"a barometric pressure is absolute, not {reference}"))
        return None
    if not isinstance(value, float) or not math.isfinite(value) or value <= 0.0:
        problems.append(ConfigProblem(path, f"expected a positive pressure, got {value!r}"))
        return None
    return value


def compile_barometer(cfg: config.Barometer) -> BarometerSpec:
    """Check the ``barometer:`` section once and turn it into a spec. Raises ConfigError."""
    problems: list[ConfigProblem] = []
    low, high = DEFAULT_PLAUSIBLE
    if cfg.plausible is not None:
        lo = _absolute(cfg.plausible[0], "barometer.plausible[0]", problems)
        hi = _absolute(cfg.plausible[1], "barometer.plausible[1]", problems)
        if lo is not None and hi is not None:
            if lo >= hi:
                problems.append(
                    ConfigProblem("barometer.plausible", "the low end must be below the high end")
                )
            low, high = lo, hi
    fallback, origin, configured = STANDARD_ATMOSPHERE, "fixed", False
    if cfg.fixed is not None and cfg.altitude is not None:
        problems.append(ConfigProblem("barometer", "give either fixed or altitude, not both"))
    if cfg.fixed is not None:
        value = _absolute(cfg.fixed, "barometer.fixed", problems)
        if value is not None:
            fallback, origin, configured = value, "fixed", True
    elif cfg.altitude is not None:
        if not ALTITUDE_RANGE[0] <= cfg.altitude <= ALTITUDE_RANGE[1]:
            problems.append(
                ConfigProblem(
                    "barometer.altitude",
                    f"{cfg.altitude:g} m is outside {ALTITUDE_RANGE[0]:g}..{ALTITUDE_RANGE[1]:g} m"
                    " where the standard atmosphere formula holds",
                )
            )
        else:
            fallback, origin, configured = standard_atmosphere(cfg.altitude), "altitude", True
    if configured and not low <= fallback <= high and not problems:
        where = "barometer.fixed" if origin == "fixed" else "barometer.altitude"
        problems.append(
            ConfigProblem(
                where,
                f"gives {fallback / 1000:.2f} kPa, outside the plausible band "
                f"{low / 1000:g}..{high / 1000:g} kPa; check the unit or set barometer.plausible",
            )
        )
    if cfg.max_age <= 0.0:
        problems.append(ConfigProblem("barometer.max_age", "must be longer than zero"))
    if problems:
        raise ConfigError(problems)
    return BarometerSpec(fallback, origin, configured, cfg.tag, cfg.max_age, low, high)


def _fallback(spec: BarometerSpec, reason: str) -> BarometerReading:
    return BarometerReading(spec.fallback, spec.fallback_origin, uncertain(reason))


def resolve(spec: BarometerSpec, snapshot: Mapping[str, Sample], now: float) -> BarometerReading:
    """The barometric pressure to use now. Never raises on plant data."""
    if spec.tag is None:
        if spec.configured:
            return BarometerReading(spec.fallback, spec.fallback_origin, GOOD)
        return _fallback(spec, DEFAULT)
    sample = snapshot.get(spec.tag)
    if sample is None:
        return _fallback(spec, NO_DATA)
    if not sample.usable:
        return _fallback(spec, BAD)
    # A live OPC UA subscription re-delivers an unchanged value with a fresh receive time;
    # the source's own timestamp says when the instrument last gave a reading. The older
    # of the two counts (for Modbus both are the time of the read).
    age = now - min(sample.receive_time, sample.source_time)
    if not age <= spec.max_age:  # also catches a NaN time
        return _fallback(spec, STALE)
    if not spec.low <= sample.value <= spec.high:
        return _fallback(spec, IMPLAUSIBLE)
    quality: Quality = GOOD if sample.quality.level is Level.GOOD else sample.quality
    return BarometerReading(sample.value, "tag", quality)
