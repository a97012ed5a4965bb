"""Quantities in alarm definitions: which kind of limit a signal takes, how a limit or a
difference is parsed, and how a value is shown in the unit the limit was written in. Pure.

Kinds follow the signal: pressure (a level needs its reference: ``10 barg``), temperature
(a level; its differences are written in K or delta degC/degF), tdiff (superheat,
deviation), and enthalpy, entropy, density with the few units listed in ``EXTRA_UNITS``.
"""

from __future__ import annotations

import re

from edge import units
from edge.errors import UnitError

__all__ = [
    "EXTRA_UNITS",
    "POINT_KINDS",
    "comparable",
    "from_si",
    "parse_difference",
    "parse_level",
    "pressure_label",
    "unit_fields",
]

# Quantities of point signals: (kind of the value, pressure reference).
POINT_KINDS: dict[str, tuple[str, str | None]] = {
    "pressure": ("pressure", "absolute"),
    "temperature": ("temperature", None),
    "tsat": ("temperature", None),
    "superheat": ("tdiff", None),
    "deviation": ("tdiff", None),
    "enthalpy": ("enthalpy", None),
    "entropy": ("entropy", None),
    "density": ("density", None),
}

# Units units.py does not know: kind -> symbol -> factor to SI.
EXTRA_UNITS: dict[str, dict[str, float]] = {
    "enthalpy": {"J/kg": 1.0, "kJ/kg": 1e3, "MJ/kg": 1e6},
    "entropy": {"J/(kg K)": 1.0, "kJ/(kg K)": 1e3},
    "density": {"kg/m3": 1.0, "g/cm3": 1e3},
}
_EXTRA_ALIASES = {
    k: {s.lower().replace(" ", ""): s for s in table} for k, table in EXTRA_UNITS.items()
}
_NUMBER = re.compile(r"^\s*([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def pressure_label(unit: str, reference: str | None) -> str:
    """``bar`` + gauge -> ``barg``; ``kPa`` + absolute -> ``kPa a``; vacuum -> ``inHg vac``."""
    if reference is None:
        return unit
    if reference == "vacuum":
        return f"{unit} vac"
    letter = "g" if reference == "gauge" else "a"
    return f"{unit}{letter}" if unit in ("bar", "mbar", "psi") else f"{unit} {letter}"


def from_si(value: float, unit: str, kind: str) -> float:
    if not unit:
        return value
    if kind in EXTRA_UNITS:
        return value / EXTRA_UNITS[kind][unit]
    return units.from_si(value, unit, kind)


def _parse_extra(text: str, kind: str) -> units.Quantity:
    m = _NUMBER.match(text)
    if not m or not m.group(2):
        raise UnitError(f"expected '<number> <unit>', got {text!r}")
    sym = _EXTRA_ALIASES[kind].get(m.group(2).lower().replace(" ", ""))
    if sym is None:
        raise UnitError(
            f"unknown {kind} unit {m.group(2)!r}; accepted: {', '.join(EXTRA_UNITS[kind])}"
        )
    return units.Quantity(float(m.group(1)) * EXTRA_UNITS[kind][sym], kind, sym)


def parse_level(text: str, quantity: str) -> units.Quantity:
    """A limit on a value of this quantity (absolute temperature, pressure with reference)."""
    if quantity in EXTRA_UNITS:
        return _parse_extra(text, quantity)
    q = units.parse(text, quantity)
    if quantity == "pressure" and q.reference is None:
        plain = " ".join(text.split())
        raise UnitError(
            f"{text!r} does not say gauge or absolute; write e.g. '{plain}g' or '{plain}a'"
        )
    return q


def parse_difference(text: str, quantity: str) -> units.Quantity:
    """A difference of this quantity (deadband, deviation limit, rate per minute)."""
    if quantity in EXTRA_UNITS:
        q = _parse_extra(text, quantity)
    elif quantity == "pressure":
        q = units.parse(text, "pressure")
        q = units.Quantity(q.value, q.kind, q.unit)  # a difference has no reference
    else:  # temperature and tdiff: a difference is written in K or delta degC/degF
        q = units.parse(text, "tdiff")
    if q.value < 0:
        raise UnitError(f"{text!r}: a difference cannot be negative")
    return q


def comparable(quantity: str) -> str:
    """Quantities that can be subtracted from each other share this name."""
    return "temperature" if quantity in ("temperature", "tdiff") else quantity


def unit_fields(q: units.Quantity, quantity: str, reference: str | None) -> dict[str, object]:
    """``unit``, ``unit_kind`` and ``unit_label`` of an AlarmDef for a parsed limit."""
    # temperature limits are levels ("temperature"), their differences "tdiff"
    kind = quantity if quantity in EXTRA_UNITS or quantity == "pressure" else q.kind
    label = pressure_label(q.unit, reference) if kind == "pressure" else q.unit
    return {"unit": q.unit, "unit_kind": kind, "unit_label": label}
