"""Quantities with units: parse at the edges, compute in SI inside.

Pressure is pascal, temperature kelvin, temperature differences kelvin, time seconds,
length metres. A pressure string may carry its reference: ``7 barg``, ``14.7 psia``,
``25 inHg vac``, ``3 bar gauge``; a bare ``7 bar`` has no reference (``None``) and the
caller decides whether that is allowed (for tags it is not: DESIGN.md).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

from edge.errors import UnitError

__all__ = [
    "PRESSURE_UNITS",
    "Quantity",
    "UnitInfo",
    "format_quantity",
    "from_si",
    "parse",
    "parse_duration",
    "parse_length",
    "parse_pressure",
    "parse_temperature",
    "parse_temperature_difference",
    "to_si",
    "unit_info",
    "units_of",
]

STANDARD_ATMOSPHERE = 101_325.0  # Pa
ZERO_CELSIUS = 273.15  # K


@dataclass(frozen=True, slots=True)
class UnitInfo:
    """How to turn a number in this unit into SI: ``si = value * factor + offset``."""

    symbol: str  # canonical spelling, e.g. "kPa", "degC"
    kind: str  # pressure | temperature | tdiff | time | length | mass_flow | volume_flow, or a
    # display kind: enthalpy | entropy | density | power | energy | mass | energy_density
    factor: float
    offset: float = 0.0
    reference: str | None = None  # for pressures written with a suffix: barg, psia


@dataclass(frozen=True, slots=True)
class Quantity:
    value: float  # SI
    kind: str
    unit: str  # canonical symbol the user wrote, for answering in the same unit
    reference: str | None = None  # absolute | gauge | vacuum for pressures, else None


# Factors to pascal. NIST SP 811 (2008), Appendix B.8 ("Factors for units listed
# alphabetically"): psi 6.894 757 E+03 (1 lbf/in2, exact from the pound-force and the
# inch), kilogram-force per square centimetre 9.806 65 E+04 (exact), inch of mercury
# (conventional, 0 degC) 3.386 389 E+03, millimetre of mercury (conventional)
# 1.333 224 E+02, standard atmosphere 1.013 25 E+05 (exact), torr 101 325/760
# (1.333 224 E+02, exact by definition), inch of water at 39.2 degF (4 degC, the density
# maximum) 2.490 82 E+02, millimetre of water (conventional: 1000 kg/m3 and standard
# gravity) 9.806 65 E+00 (exact). A transmitter ranged in inH2O at 60 degF or 68 degF
# reads 0.1 % differently; no boiler check depends on that.
PRESSURE_UNITS: dict[str, float] = {
    "Pa": 1.0,
    "mPa": 1e-3,
    "hPa": 100.0,
    "kPa": 1e3,
    "MPa": 1e6,
    "bar": 1e5,
    "mbar": 100.0,
    "psi": 6894.757293168361,  # 1 lbf/in²
    "kg/cm2": 98066.5,  # kgf/cm² (technical atmosphere)
    "inHg": 3386.389,  # conventional, 0 °C mercury
    "mmHg": 133.322387415,
    "atm": STANDARD_ATMOSPHERE,
    "Torr": STANDARD_ATMOSPHERE / 760.0,
    "inH2O": 249.082,  # at 39.2 °F (4 °C)
    "mmH2O": 9.80665,  # conventional
}

# Spellings as written. Where an SI prefix changes with its case (m milli, M mega) the case
# is kept: "5 mPa" is five millipascal, "5 MPa" five megapascal, "MBAR" nothing. Any other
# spelling matches whatever its case ("KPA", "psi", "torr", "INH2O").
_PRESSURE_SPELLINGS = {
    **{sym: sym for sym in PRESSURE_UNITS},
    "kg/cm²": "kg/cm2",
    "kgf/cm2": "kg/cm2",
    "kgf/cm²": "kg/cm2",
}
_CASE_KEEPING_PREFIXES = "mM"

_TEMPERATURE = {
    "K": UnitInfo("K", "temperature", 1.0, 0.0),
    "degC": UnitInfo("degC", "temperature", 1.0, ZERO_CELSIUS),
    "degF": UnitInfo("degF", "temperature", 5.0 / 9.0, ZERO_CELSIUS - 32.0 * 5.0 / 9.0),
}
_TEMPERATURE_ALIASES = {
    "k": "K",
    "kelvin": "K",
    "degc": "degC",
    "°c": "degC",
    "c": "degC",
    "celsius": "degC",
    "degf": "degF",
    "°f": "degF",
    "f": "degF",
    "fahrenheit": "degF",
    "deg c": "degC",
    "deg f": "degF",
    "\u2103": "degC",  # the single-character degree Celsius sign
    "\u2109": "degF",  # the single-character degree Fahrenheit sign
}
_TDIFF = {
    "K": UnitInfo("K", "tdiff", 1.0),
    "delta degC": UnitInfo("delta degC", "tdiff", 1.0),
    "delta degF": UnitInfo("delta degF", "tdiff", 5.0 / 9.0),
}
_TDIFF_ALIASES = {
    "k": "K",
    "kelvin": "K",
    "delta degc": "delta degC",
    "delta °c": "delta degC",
    "delta c": "delta degC",
    "δc": "delta degC",
    "δ°c": "delta degC",
    "delta degf": "delta degF",
    "delta °f": "delta degF",
    "delta f": "delta degF",
    "δf": "delta degF",
    "δ°f": "delta degF",
}
_TIME = {
    "ms": UnitInfo("ms", "time", 1e-3),
    "s": UnitInfo("s", "time", 1.0),
    "min": UnitInfo("min", "time", 60.0),
    "h": UnitInfo("h", "time", 3600.0),
    "d": UnitInfo("d", "time", 86400.0),
}
_TIME_ALIASES = {
    "ms": "ms",
    "s": "s",
    "sec": "s",
    "second": "s",
    "seconds": "s",
    "min": "min",
    "mins": "min",
    "minute": "min",
    "minutes": "min",
    "h": "h",
    "hr": "h",
    "hour": "h",
    "hours": "h",
    "d": "d",
    "day": "d",
    "days": "d",
}
_LENGTH = {
    "m": UnitInfo("m", "length", 1.0),
    "km": UnitInfo("km", "length", 1000.0),
    "ft": UnitInfo("ft", "length", 0.3048),
    "mm": UnitInfo("mm", "length", 1e-3),
    "cm": UnitInfo("cm", "length", 1e-2),
    "in": UnitInfo("in", "length", 0.0254),
}
_LENGTH_ALIASES = {
    "m": "m",
    "km": "km",
    "ft": "ft",
    "feet": "ft",
    "foot": "ft",
    "mm": "mm",
    "cm": "cm",
    "in": "in",
    "inch": "in",
}
# Flow signals (tags may read them) and the figures flows produce (display kinds below).
_MASS_FLOW = {
    "kg/s": UnitInfo("kg/s", "mass_flow", 1.0),
    "kg/min": UnitInfo("kg/min", "mass_flow", 1 / 60),
    "kg/h": UnitInfo("kg/h", "mass_flow", 1 / 3600),
    "t/h": UnitInfo("t/h", "mass_flow", 1000 / 3600),
    "lb/h": UnitInfo("lb/h", "mass_flow", 0.45359237 / 3600),
}
_MASS_FLOW_ALIASES = {u.lower(): u for u in _MASS_FLOW}
_VOLUME_FLOW = {
    "m3/s": UnitInfo("m3/s", "volume_flow", 1.0),
    "m3/min": UnitInfo("m3/min", "volume_flow", 1 / 60),
    "m3/h": UnitInfo("m3/h", "volume_flow", 1 / 3600),
    "l/s": UnitInfo("l/s", "volume_flow", 1e-3),
    "l/min": UnitInfo("l/min", "volume_flow", 1e-3 / 60),
}
_VOLUME_FLOW_ALIASES = {
    **{u.lower(): u for u in _VOLUME_FLOW},
    "m³/s": "m3/s",
    "m³/min": "m3/min",
    "m³/h": "m3/h",
}
_POWER = {
    "W": UnitInfo("W", "power", 1.0),
    "kW": UnitInfo("kW", "power", 1e3),
    "MW": UnitInfo("MW", "power", 1e6),
}
_POWER_ALIASES = {u.lower(): u for u in _POWER}
_ENERGY = {
    "J": UnitInfo("J", "energy", 1.0),
    "kJ": UnitInfo("kJ", "energy", 1e3),
    "MJ": UnitInfo("MJ", "energy", 1e6),
    "GJ": UnitInfo("GJ", "energy", 1e9),
    "kWh": UnitInfo("kWh", "energy", 3.6e6),
    "MWh": UnitInfo("MWh", "energy", 3.6e9),
}
_ENERGY_ALIASES = {u.lower(): u for u in _ENERGY}
_MASS = {"kg": UnitInfo("kg", "mass", 1.0), "t": UnitInfo("t", "mass", 1000.0)}
_MASS_ALIASES = {"kg": "kg", "t": "t"}
_HEAT_PER_VOLUME = {  # heating value of a fuel metered by volume
    "J/m3": UnitInfo("J/m3", "energy_density", 1.0),
    "kJ/m3": UnitInfo("kJ/m3", "energy_density", 1e3),
    "MJ/m3": UnitInfo("MJ/m3", "energy_density", 1e6),
    "kWh/m3": UnitInfo("kWh/m3", "energy_density", 3.6e6),
}
_HEAT_PER_VOLUME_ALIASES = {u.lower(): u for u in _HEAT_PER_VOLUME}

_REFERENCE_WORDS = {
    "g": "gauge",
    "(g)": "gauge",
    "gauge": "gauge",
    "gage": "gauge",
    "a": "absolute",
    "(a)": "absolute",
    "abs": "absolute",
    "absolute": "absolute",
    "vac": "vacuum",
    "vacuum": "vacuum",
    "v": "vacuum",
}

# Display-only kinds (steam properties): reachable with an explicit ``kind`` only, so a tag
# unit looked up without a kind never turns into one of them. Their spellings are matched
# without spaces (``kJ / kg``, ``J/(kgK)`` and ``J/(kg K)`` are one unit). These are the
# units of alarm limits on point properties too (``edge.config.quantities``).
_ENTHALPY = {
    "J/kg": UnitInfo("J/kg", "enthalpy", 1.0),
    "kJ/kg": UnitInfo("kJ/kg", "enthalpy", 1e3),
    "MJ/kg": UnitInfo("MJ/kg", "enthalpy", 1e6),
    "Btu/lb": UnitInfo("Btu/lb", "enthalpy", 2326.0),  # International Table Btu per pound
}
_ENTHALPY_ALIASES = {
    "j/kg": "J/kg",
    "kj/kg": "kJ/kg",
    "mj/kg": "MJ/kg",
    "btu/lb": "Btu/lb",
    "btu/lbm": "Btu/lb",
}
_ENTROPY = {
    "J/(kg K)": UnitInfo("J/(kg K)", "entropy", 1.0),
    "kJ/(kg K)": UnitInfo("kJ/(kg K)", "entropy", 1e3),
    "Btu/(lb R)": UnitInfo("Btu/(lb R)", "entropy", 4186.8),
}
_ENTROPY_ALIASES = {
    "j/(kgk)": "J/(kg K)",
    "j/kg/k": "J/(kg K)",
    "j/(kg·k)": "J/(kg K)",
    "kj/(kgk)": "kJ/(kg K)",
    "kj/kg/k": "kJ/(kg K)",
    "kj/(kg·k)": "kJ/(kg K)",
    "btu/(lbr)": "Btu/(lb R)",
    "btu/lb/r": "Btu/(lb R)",
    "btu/(lb·r)": "Btu/(lb R)",
}
_DENSITY = {
    "kg/m3": UnitInfo("kg/m3", "density", 1.0),
    "g/cm3": UnitInfo("g/cm3", "density", 1e3),
    "lb/ft3": UnitInfo("lb/ft3", "density", 0.45359237 / 0.3048**3),
}
_DENSITY_ALIASES = {
    "kg/m3": "kg/m3",
    "kg/m³": "kg/m3",
    "g/cm3": "g/cm3",
    "g/cm³": "g/cm3",
    "lb/ft3": "lb/ft3",
    "lb/ft³": "lb/ft3",
}

_KINDS = ("pressure", "temperature", "tdiff", "time", "length", "mass_flow", "volume_flow")
_DISPLAY_KINDS = ("enthalpy", "entropy", "density", "power", "energy", "mass", "energy_density")
_TABLES = {
    "temperature": (_TEMPERATURE, _TEMPERATURE_ALIASES),
    "tdiff": (_TDIFF, _TDIFF_ALIASES),
    "time": (_TIME, _TIME_ALIASES),
    "length": (_LENGTH, _LENGTH_ALIASES),
    "enthalpy": (_ENTHALPY, _ENTHALPY_ALIASES),
    "entropy": (_ENTROPY, _ENTROPY_ALIASES),
    "density": (_DENSITY, _DENSITY_ALIASES),
    "mass_flow": (_MASS_FLOW, _MASS_FLOW_ALIASES),
    "volume_flow": (_VOLUME_FLOW, _VOLUME_FLOW_ALIASES),
    "power": (_POWER, _POWER_ALIASES),
    "energy": (_ENERGY, _ENERGY_ALIASES),
    "mass": (_MASS, _MASS_ALIASES),
    "energy_density": (_HEAT_PER_VOLUME, _HEAT_PER_VOLUME_ALIASES),
}

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


def _accepted(kind: str) -> str:
    if kind == "pressure":
        names = list(PRESSURE_UNITS)
        return (
            ", ".join(names)
            + " (append g or a for gauge/absolute, e.g. barg, psia; or 'vac' for vacuum)"
        )
    return ", ".join(_TABLES[kind][0])


def _pressure_symbol(word: str) -> str | None:
    """The canonical symbol a pressure unit spelling names, or None."""
    sym = _PRESSURE_SPELLINGS.get(word)
    if sym is not None or not word:
        return sym
    low = word.lower()
    found = {
        s
        for spelling, s in _PRESSURE_SPELLINGS.items()
        if spelling.lower() == low
        and (spelling[0] == word[0] or word[0] not in _CASE_KEEPING_PREFIXES)
    }
    return found.pop() if len(found) == 1 else None


def _pressure_info(text: str) -> UnitInfo | None:
    raw = text.strip()
    reference = None
    # "bar gauge", "inHg vac", "psi (g)"
    parts = raw.split()
    if len(parts) == 2 and parts[1].lower() in _REFERENCE_WORDS:
        reference = _REFERENCE_WORDS[parts[1].lower()]
        word = parts[0]
    elif len(parts) == 1:
        word = parts[0]
    else:
        return None
    sym = _pressure_symbol(word)
    if sym is not None:
        return UnitInfo(sym, "pressure", PRESSURE_UNITS[sym], 0.0, reference)
    if reference is None:
        low = word.lower()
        for suffix, ref in (
            ("(g)", "gauge"),
            ("(a)", "absolute"),
            ("vac", "vacuum"),
            ("g", "gauge"),
            ("a", "absolute"),
        ):
            if low.endswith(suffix):
                sym = _pressure_symbol(word[: -len(suffix)])
                if sym is not None:
                    return UnitInfo(sym, "pressure", PRESSURE_UNITS[sym], 0.0, ref)
    return None


def _lookup(text: str, kind: str) -> UnitInfo | None:
    if kind == "pressure":
        return _pressure_info(text)
    words = text.strip().lower().split()
    low = "".join(words) if kind in _DISPLAY_KINDS else " ".join(words)
    table, aliases = _TABLES[kind]
    sym = aliases.get(low)
    return table[sym] if sym else None


def unit_info(unit: str, kind: str | None = None) -> UnitInfo:
    """Look up a unit name (``"bar"``, ``"psig"``, ``"degF"``). Raises UnitError listing the
    accepted units when it is unknown."""
    kinds = (kind,) if kind else _KINDS
    for k in kinds:
        if k not in _KINDS and k not in _DISPLAY_KINDS:
            raise UnitError(f"unknown quantity kind {k!r}")
        info = _lookup(unit, k)
        if info is not None:
            return info
    if kind:
        raise UnitError(f"unknown {_kind_word(kind)} unit {unit!r}; accepted: {_accepted(kind)}")
    raise UnitError(
        f"unknown unit {unit!r}; accepted: pressure {_accepted('pressure')}; "
        f"temperature {_accepted('temperature')}; time {_accepted('time')}; "
        f"length {_accepted('length')}; mass flow {_accepted('mass_flow')}; "
        f"volume flow {_accepted('volume_flow')}"
    )


def _kind_word(kind: str) -> str:
    return "temperature difference" if kind == "tdiff" else kind.replace("_", " ")


def parse(text: str, kind: str | None = None) -> Quantity:
    """Parse ``"<number> <unit>"``. With ``kind`` only that kind is accepted."""
    if not isinstance(text, str):
        raise UnitError(f"expected a quantity with a unit such as '7 bar', got {text!r}")
    m = _NUMBER.match(text)
    if not m:
        what = f" for {_kind_word(kind)}" if kind else ""
        raise UnitError(f"expected '<number> <unit>'{what}, got {text!r}")
    number, unit = m.group(1), m.group(2)
    if not unit:
        hint = f" ({_accepted(kind)})" if kind else ""
        raise UnitError(f"{text!r} has no unit; write it with one{hint}")
    value = float(number)
    info = unit_info(unit, kind)
    si = value * info.factor + info.offset
    if not math.isfinite(si):
        raise UnitError(f"{text!r} is not a finite quantity")
    return Quantity(si, info.kind, info.symbol, info.reference)


def parse_pressure(text: str) -> Quantity:
    """A pressure in Pa, in its own reference (see ``Quantity.reference``)."""
    return parse(text, "pressure")


def parse_temperature(text: str) -> float:
    """A temperature in kelvin."""
    return parse(text, "temperature").value


def parse_temperature_difference(text: str) -> float:
    """A temperature difference in kelvin (``2 K``, ``3.6 delta degF``)."""
    return parse(text, "tdiff").value


def parse_duration(text: str) -> float:
    """A duration in seconds."""
    q = parse(text, "time")
    if q.value < 0:
        raise UnitError(f"a duration cannot be negative, got {text!r}")
    return q.value


def parse_length(text: str) -> float:
    """A length in metres."""
    return parse(text, "length").value


def to_si(value: float, unit: str, kind: str | None = None) -> float:
    """Convert a number in ``unit`` to SI (pressure stays in its own reference)."""
    info = unit_info(unit, kind)
    return value * info.factor + info.offset


def from_si(value: float, unit: str, kind: str | None = None) -> float:
    """Convert an SI value to ``unit``."""
    info = unit_info(unit, kind)
    return (value - info.offset) / info.factor


def units_of(kind: str) -> tuple[str, ...]:
    """Every canonical unit symbol of a kind (pressure symbols without g/a suffix)."""
    if kind == "pressure":
        return tuple(PRESSURE_UNITS)
    if kind not in _TABLES:
        raise UnitError(f"unknown quantity kind {kind!r}")
    return tuple(_TABLES[kind][0])


_REFERENCE_SUFFIX = {"gauge": " gauge", "absolute": " abs", "vacuum": " vac"}


def format_quantity(
    value: float,
    unit: str,
    kind: str | None = None,
    *,
    reference: str | None = None,
    digits: int | None = None,
) -> str:
    """``"<number> <unit>"`` for an SI value, in a form :func:`parse` reads back. With
    ``digits=None`` the number is exact (``repr``); else ``digits`` significant figures.
    A pressure may carry its ``reference`` (``"7 bar gauge"``)."""
    if not math.isfinite(value):
        raise UnitError(f"cannot write {value!r} as a quantity")
    info = unit_info(unit, kind)
    number = (value - info.offset) / info.factor
    text = repr(number) if digits is None else f"{number:.{digits}g}"
    ref = reference if reference is not None else info.reference
    if ref is not None and info.kind != "pressure":
        raise UnitError(f"a reference ({ref}) only goes with a pressure, not {info.symbol}")
    if ref is not None and ref not in _REFERENCE_SUFFIX:
        raise UnitError(f"unknown pressure reference {ref!r}; accepted: absolute, gauge, vacuum")
    return f"{text} {info.symbol}{_REFERENCE_SUFFIX[ref] if ref else ''}"
