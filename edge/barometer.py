"""The barometric pressure in use: fixed, from altitude, or a live tag with fallback. Pure.

``compile_barometer`` turns the ``barometer:`` section of the config into a
:class:`BarometerSpec` once; ``resolve`` picks the value for one evaluation from a TagStore
snapshot and the current time:

* a live tag is used when its sample exists, is usable (not bad, finite), arrived no more
  than ``max_age`` seconds ago (by the older of ``Sample.receive_time`` and
  ``Sample.source_time``, so a frozen source timestamp counts) and lies inside the plausible
  band (by default 80-110 kPa at sea level, scaled by the standard atmosphere at the
  configured altitude or by the fixed value: ``edge.config.rules.plausible_band``). An
  ``uncertain`` sample is used and keeps its quality;
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
from edge.config.rules import (
    ALTITUDE_RANGE,
    STANDARD_ATMOSPHERE,
    altitude_problem,
    barometer_problem,
    plausible_band,
    standard_atmosphere,
)
from edge.errors import ConfigError, ConfigProblem
from edge.model import GOOD, BarometerReading, Level, Quality, Sample, uncertain

__all__ = [
    "ALTITUDE_RANGE",
    "FALLBACK_REASONS",
    "STANDARD_ATMOSPHERE",
    "BarometerSpec",
    "compile_barometer",
    "from_absolute",
    "plausible_band",
    "resolve",
    "standard_atmosphere",
    "to_absolute",
]

NO_DATA = "barometer_no_data"
BAD = "barometer_bad"
STALE = "barometer_stale"
IMPLAUSIBLE = "barometer_implausible"
DEFAULT = "barometer_default"
# the reasons a configured fallback stands in for the live tag (not DEFAULT: no barometer
# configured at all, sea level assumed, which can be far off)
FALLBACK_REASONS = frozenset({NO_DATA, BAD, STALE, IMPLAUSIBLE})


def to_absolute(value: float, reference: str | None, baro: float) -> float:
    """Absolute pressure (Pa) of ``value`` (Pa) read in ``reference`` against the barometer
    ``baro`` (Pa absolute): gauge adds the barometer, vacuum is measured down from it,
    absolute (or no reference) is taken as it is."""
    if reference == "gauge":
        return value + baro
    if reference == "vacuum":
        return baro - value
    return value


def from_absolute(absolute: float, reference: str | None, baro: float) -> float:
    """Inverse of ``to_absolute``: the absolute pressure ``absolute`` (Pa) as a reading in
    ``reference``."""
    if reference == "gauge":
        return absolute - baro
    if reference == "vacuum":
        return baro - absolute
    return absolute


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
    """Check the ``barometer:`` section once and turn it into a spec. Raises ConfigError.
    The bands are ``edge.config.rules``'s, the same ``check`` and ``calc`` apply."""
    problems: list[ConfigProblem] = []
    fallback, origin, configured = STANDARD_ATMOSPHERE, "fixed", False
    if cfg.fixed is not None and cfg.altitude is not None:
        problems.append(ConfigProblem("barometer", "give either fixed or altitude, not both"))
    if cfg.fixed is not None:
        value = _absolute(cfg.fixed, "barometer.fixed", problems)
        if value is not None and (why := barometer_problem(value)) is not None:
            problems.append(ConfigProblem("barometer.fixed", why))
        elif value is not None:
            fallback, origin, configured = value, "fixed", True
    elif cfg.altitude is not None:
        if (why := altitude_problem(cfg.altitude)) is not None:
            problems.append(ConfigProblem("barometer.altitude", why))
        else:
            fallback, origin, configured = standard_atmosphere(cfg.altitude), "altitude", True
    low, high = plausible_band(fallback)
    if cfg.plausible is not None:
        lo = _absolute(cfg.plausible[0], "barometer.plausible[0]", problems)
        hi = _absolute(cfg.plausible[1], "barometer.plausible[1]", problems)
        if lo is not None and hi is not None:
            if lo >= hi:
                problems.append(
                    ConfigProblem("barometer.plausible", "the low end must be below the high end")
                )
            low, high = lo, hi
    if configured and not low <= fallback <= high and not problems:
        where = "barometer.fixed" if origin == "fixed" else "barometer.altitude"
        problems.append(
            ConfigProblem(
                where,
                f"gives {fallback / 1000:.2f} kPa, outside barometer.plausible "
                f"{low / 1000:g}..{high / 1000:g} kPa",
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
