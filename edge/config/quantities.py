"""Quantities in alarm limits: which kind of limit a signal takes, how a limit or a
difference is parsed, and how a value is shown in the unit the limit was written in. Pure.
The one reading of a limit: the config checks (``edge.config.signals``) and the alarm
definitions both parse with ``parse_level`` and ``parse_difference``.

Kinds follow the signal: pressure (a level needs its reference: ``10 barg``; a difference
has none), temperature (a level; its differences are written in K or delta degC/degF),
tdiff (superheat, deviation), time and length tags, and enthalpy, entropy, density with
their units from ``edge.units``.
"""

from __future__ import annotations

from edge import units
from edge.errors import UnitError

__all__ = [
    "POINT_KINDS",
    "comparable",
    "from_si",
    "parse_difference",
    "parse_level",
    "pressure_label",
    "quantity_text",
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


def pressure_label(unit: str, reference: str | None) -> str:
    """``bar`` + gauge -> ``barg``; ``kPa`` + absolute -> ``kPa a``; vacuum -> ``inHg vac``."""
    if reference is None:
        return unit
    if reference == "vacuum":
        return f"{unit} vac"
    letter = "g" if reference == "gauge" else "a"
    return f"{unit}{letter}" if unit in ("bar", "mbar", "psi") else f"{unit} {letter}"


def from_si(value: float, unit: str, kind: str) -> float:
    """An SI value in ``unit`` (of ``kind``); unchanged without a unit."""
    if not unit:
        return value
    return units.from_si(value, unit, kind)


def quantity_text(value: object) -> str:
    """``value`` if it is a string; UnitError for anything else (a bare number, a bool)."""
    if isinstance(value, bool) or not isinstance(value, str):
        raise UnitError(f"expected a quantity with a unit, got {value!r}")
    return value


def parse_level(text: str, quantity: str, *, reads: str = "") -> units.Quantity:
    """A limit on a value of this quantity (absolute temperature, pressure with reference).
    A pressure level must name its reference; ``reads`` (what the signal reads, e.g.
    ``"drum.pressure reads absolute pressure"``) is added to the message when it does not."""
    text = quantity_text(text)
    q = units.parse(text, quantity)
    if quantity == "pressure" and q.reference is None:
        plain = " ".join(text.split())
        about = f" ({reads})" if reads else ""
        raise UnitError(
            f"{text!r} does not say gauge or absolute; write e.g. '{plain}g' or '{plain}a'" + about
        )
    return q


def parse_difference(text: str, quantity: str) -> units.Quantity:
    """A difference of this quantity (deadband, deviation limit, rate per minute), never
    negative; a temperature difference is written in K or delta degC/degF, a pressure
    difference without a reference."""
    text = quantity_text(text)
    kind = "tdiff" if quantity == "temperature" else quantity
    q = units.parse(text, kind)
    if kind == "pressure" and q.reference is not None:
        raise UnitError(
            f"{text!r}: a pressure difference has no reference; write it without "
            "g/a/vac, e.g. '0.2 bar'"
        )
    if q.value < 0:
        raise UnitError(f"{text!r}: a difference cannot be negative")
    return q


def comparable(quantity: str) -> str:
    """Quantities that can be subtracted from each other share this name."""
    return "temperature" if quantity in ("temperature", "tdiff") else quantity


def unit_fields(q: units.Quantity, reference: str | None) -> dict[str, object]:
    """``unit``, ``unit_kind`` and ``unit_label`` of an AlarmDef for a parsed limit (its kind
    is the limit's own: a temperature level "temperature", a temperature difference "tdiff")."""
    label = pressure_label(q.unit, reference) if q.kind == "pressure" else q.unit
    return {"unit": q.unit, "unit_kind": q.kind, "unit_label": label}
