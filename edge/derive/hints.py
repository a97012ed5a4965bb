"""Commissioning hints: which configuration mistake would make a saturated point agree. Pure.

On a saturated point the measured temperature should equal Tsat at the measured pressure.
When it does not (``deviation`` above the point's tolerance, or a pressure that comes out
impossible), :func:`find` replays the raw values under the usual mistakes:

* another pressure reference: gauge configured as absolute or the reverse, vacuum read as
  gauge, gauge read as vacuum ...;
* another pressure unit: psi/kPa (6.894757), bar/kPa (100), bar/psi (14.5038), MPa/bar (10),
  kPa/MPa (1000), kg/cm2/bar (0.980665) ... every pair of units ``units.py`` knows;
* both of these at once;
* another temperature unit (degC, degF, K).

A candidate counts when it brings |T - Tsat| inside the tolerance *and* to less than half
of the deviation seen, so a point just outside its tolerance is not "explained" by the 2 %
between bar and kg/cm2. The fewest changes win, then the closest agreement. The answer is
one plain sentence naming the mistake and the setting that fixes it.
"""

from __future__ import annotations

import math
from typing import TYPE_CHECKING

from edge import units
from edge.steam import PSAT_MAX, PSAT_MIN, tsat_unchecked

if TYPE_CHECKING:
    from edge.derive.points import PointSpec

__all__ = ["REFERENCES", "TEMPERATURE_UNITS", "absolute", "find"]

REFERENCES = ("absolute", "gauge", "vacuum")
TEMPERATURE_UNITS = ("K", "degC", "degF")


def absolute(raw: float, reference: str, baro: float) -> float:
    """Absolute pressure (Pa) from a reading (Pa) in its reference."""
    if reference == "absolute":
        return raw
    if reference == "gauge":
        return raw + baro
    return baro - raw


def _deviation(p: float, t: float) -> float:
    if not (math.isfinite(p) and PSAT_MIN <= p <= PSAT_MAX):
        return math.inf
    return abs(t - tsat_unchecked(p))


def find(spec: PointSpec, raw_pressure: float, t: float, baro: float) -> str | None:
    """The likely mistake on a saturated point, as one sentence, or None.

    ``raw_pressure`` is the pressure tag's value (Pa, in its configured reference and unit),
    ``t`` the temperature (K), ``baro`` the barometric pressure in use (Pa; NaN if none).
    Never raises."""
    try:
        return _search(spec, raw_pressure, t, baro)
    except (ArithmeticError, ValueError):  # a hint must never break evaluation
        return None


def _search(spec: PointSpec, raw: float, t: float, baro: float) -> str | None:
    tolerance = spec.tolerance
    if not (math.isfinite(raw) and math.isfinite(t) and math.isfinite(tolerance)):
        return None
    have_baro = math.isfinite(baro)
    if spec.reference != "absolute" and not have_baro:
        return None
    seen = _deviation(absolute(raw, spec.reference, baro), t)
    limit = min(tolerance, seen / 2.0)
    candidates: list[tuple[int, float, str]] = []
    p_unit = spec.pressure_unit if spec.pressure_unit in units.PRESSURE_UNITS else "Pa"
    number = raw / units.PRESSURE_UNITS[p_unit]
    for reference in REFERENCES:
        if reference != "absolute" and not have_baro:
            continue
        for unit, factor in units.PRESSURE_UNITS.items():
            changes = (reference != spec.reference) + (unit != p_unit)
            if changes == 0:
                continue
            dev = _deviation(absolute(number * factor, reference, baro), t)
            if dev <= limit:
                candidates.append((changes, dev, _pressure_text(spec, reference, unit, p_unit)))
    t_unit = spec.temperature_unit
    if spec.temperature_tag is not None and t_unit in TEMPERATURE_UNITS:
        p = absolute(raw, spec.reference, baro)
        t_number = units.from_si(t, t_unit, "temperature")
        for unit in TEMPERATURE_UNITS:
            if unit == t_unit:
                continue
            dev = _deviation(p, units.to_si(t_number, unit, "temperature"))
            if dev <= limit:
                text = (
                    f"the pressure agrees if {spec.temperature_tag} is in {unit}, "
                    f"not {t_unit}: set unit: {unit}"
                )
                candidates.append((1, dev, text))
    if not candidates:
        return None
    return min(candidates)[2]


def _pressure_text(spec: PointSpec, reference: str, unit: str, configured_unit: str) -> str:
    tag = spec.pressure_tag
    if unit == configured_unit:
        return (
            f"the temperature agrees if {tag} reads {reference} pressure, not "
            f"{spec.reference}: set reference: {reference}"
        )
    if reference == spec.reference:
        return (
            f"the temperature agrees if {tag} is in {unit}, not {configured_unit}: set unit: {unit}"
        )
    return (
        f"the temperature agrees if {tag} reads {reference} pressure in {unit}, not "
        f"{spec.reference} in {configured_unit}: set unit: {unit} and reference: {reference}"
    )
