"""steam-edge calc: one-off steam figures for commissioning, from IAPWS-IF97.

    steam-edge calc 7 barg --altitude 420 m
    steam-edge calc 7 barg 185 degC --baro 101.3 kPa
    steam-edge calc 25 inHg vac
    steam-edge calc 170 degC

Quantities are a number and a unit, as two words or one (``7 barg``, ``7barg``). A
pressure must say its reference (``barg``/``bara``, ``psig``/``psia``, ``... vac``): a bare
``7 bar`` is refused, because gauge/absolute mix-ups are the classic steam-table mistake.
A temperature alone gives the saturation pressure, absolute and as gauge. A (p, T) within
0.05 K of Tsat is taken as saturated: there (p, T) does not fix the phase. Answers come in
the units typed (psi in: psi, degF, Btu/lb out); ``--json`` gives SI values, units named.
The barometer is ``--baro``, ``--altitude`` (standard atmosphere) or, by default, the
standard atmosphere at sea level, 101.325 kPa, and the output says which.
"""

from __future__ import annotations

import argparse
import json
import math
import re
import sys
from dataclasses import dataclass, field

from edge import units
from edge.barometer import to_absolute
from edge.config.rules import (
    STANDARD_ATMOSPHERE,
    altitude_problem,
    barometer_problem,
    standard_atmosphere,
)
from edge.errors import CalcError, SteamError, UnitError
from edge.units import Quantity

EXIT_USAGE = 2
IMPERIAL_PRESSURES = ("psi", "inHg")
SI_UNITS = {
    "pressure": "Pa",
    "temperature": "K",
    "tdiff": "K",
    "enthalpy": "J/kg",
    "entropy": "J/(kg K)",
    "density": "kg/m3",
}
SATURATED_BAND = 0.05  # K: closer to Tsat than this, a typed (p, T) is taken as saturated
INSTRUMENT_BAND = 2.0  # K: a point's default band (its tolerance): the monitor's caution
ADVISORY = "advisory figures only; never a substitute for certified safety controls"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = (
        "examples:\n"
        "  steam-edge calc 7 barg --altitude 420 m\n"
        "  steam-edge calc 7 barg 185 degC --baro 101.3 kPa\n"
        "  steam-edge calc 25 inHg vac\n"
        "  steam-edge calc 170 degC\n"
        "  steam-edge calc 100 psig 400 degF --json"
    )
    parser.add_argument(
        "quantities",
        nargs="*",
        metavar="QUANTITY",
        help="a pressure with its reference (7 barg, 14.7 psia, 25 inHg vac) and/or a "
        "temperature (185 degC, 365 degF, 458 K)",
    )
    where = parser.add_mutually_exclusive_group()
    where.add_argument(
        "--baro", nargs="+", metavar="PRESSURE", help="barometric pressure, e.g. 101.3 kPa"
    )
    where.add_argument(
        "--altitude",
        nargs="+",
        metavar="LENGTH",
        help="site altitude for the standard atmosphere, e.g. 420 m or 1380 ft",
    )
    parser.add_argument("--json", action="store_true", help="SI values with their units")


# ---------------------------------------------------------------- reading the command line

_SPLIT = re.compile(r"\s+(?=[-+]?(?:\d|\.\d))")


def split_quantities(words: list[str]) -> list[str]:
    """``["7", "barg", "185degC"]`` -> ``["7 barg", "185degC"]``: a new quantity starts at
    every word that begins with a number."""
    text = " ".join(w.strip() for w in words if w.strip())
    return [chunk for chunk in _SPLIT.split(text) if chunk]


def _one(words: list[str], what: str, kind: str) -> tuple[Quantity, list[str]]:
    chunks = split_quantities(words)
    if not chunks:
        raise CalcError(f"{what} needs a value with a unit")
    return units.parse(chunks[0], kind), chunks[1:]


@dataclass
class Inputs:
    pressure: Quantity | None = None
    pressure_text: str = ""
    temperature: Quantity | None = None
    temperature_text: str = ""
    baro: float = STANDARD_ATMOSPHERE
    baro_origin: str = "standard"  # "given" | "altitude" | "standard"
    baro_text: str = "standard atmosphere at sea level (the default: give --baro or --altitude)"


def read_inputs(args: argparse.Namespace) -> Inputs:
    words = list(args.quantities)
    inputs = Inputs()
    if args.baro:
        q, rest = _one(args.baro, "--baro", "pressure")
        if q.reference not in (None, "absolute"):
            raise CalcError(f"--baro is an absolute pressure, not {q.reference}")
        if (why := barometer_problem(q.value)) is not None:
            raise CalcError(f"--baro: {why}")
        inputs.baro, inputs.baro_origin, inputs.baro_text = q.value, "given", "given with --baro"
        words += rest
    elif args.altitude:
        q, rest = _one(args.altitude, "--altitude", "length")
        if (why := altitude_problem(q.value)) is not None:
            raise CalcError(f"--altitude: {why}")
        inputs.baro, inputs.baro_origin = standard_atmosphere(q.value), "altitude"
        typed = split_quantities(args.altitude)[0]
        inputs.baro_text = f"standard atmosphere at {typed}"
        words += rest
    for chunk in split_quantities(words):
        try:
            q = units.parse(chunk)
        except UnitError as exc:
            raise CalcError(f"{exc}") from exc
        if q.kind == "pressure":
            if inputs.pressure is not None:
                raise CalcError("give one pressure at most")
            if q.reference is None:
                raise CalcError(
                    f"{chunk!r} does not say gauge or absolute: write it as "
                    f"'{chunk}g' (gauge) or '{chunk}a' (absolute)"
                )
            inputs.pressure, inputs.pressure_text = q, chunk
        elif q.kind == "temperature":
            if inputs.temperature is not None:
                raise CalcError("give one temperature at most")
            inputs.temperature, inputs.temperature_text = q, chunk
        else:
            raise CalcError(f"{chunk!r} is a {q.kind}; calc takes a pressure and a temperature")
    if inputs.pressure is None and inputs.temperature is None:
        raise CalcError("give a pressure (e.g. 7 barg), a temperature (e.g. 170 degC) or both")
    return inputs


# ---------------------------------------------------------------- computing


@dataclass(frozen=True)
class Row:
    key: str  # JSON name
    label: str  # table label
    value: float  # SI
    kind: str  # pressure | temperature | tdiff | enthalpy | entropy | density
    note: str = ""
    reference: str | None = None  # for pressures: absolute | gauge | vacuum


@dataclass
class Result:
    rows: list[Row] = field(default_factory=list)
    state: str | None = None
    notes: list[str] = field(default_factory=list)


def calculate(inputs: Inputs) -> Result:
    """Every figure calc shows, in SI. Raises CalcError/SteamError on impossible input."""
    from edge import steam  # here: other commands need not build the steam tables

    res = Result()
    baro = inputs.baro
    rows = res.rows
    if inputs.pressure is None:
        assert inputs.temperature is not None
        t = inputs.temperature.value
        p = steam.psat(t)
        rows.append(Row("temperature", "saturation temperature", t, "temperature"))
        rows.append(Row("barometer", "barometer", baro, "pressure", inputs.baro_text))
        rows.append(Row("psat", "saturation pressure", p, "pressure", "", "absolute"))
        _gauge_row(rows, p, baro)
        _saturated_rows(rows, p)
        return res
    q = inputs.pressure
    p = to_absolute(q.value, q.reference, baro)
    rows.append(Row("pressure_typed", "pressure (as typed)", q.value, "pressure", "", q.reference))
    rows.append(Row("barometer", "barometer", baro, "pressure", inputs.baro_text))
    if not p > 0.0:
        raise CalcError(
            f"{inputs.pressure_text} below a barometer of {baro / 1e3:.3f} kPa is not a "
            "positive absolute pressure"
        )
    rows.append(Row("pressure_absolute", "absolute pressure", p, "pressure", "", "absolute"))
    if q.reference == "absolute":
        _gauge_row(rows, p, baro)
    on_line = steam.PSAT_MIN <= p <= steam.PSAT_MAX
    ts = steam.tsat(p) if on_line else None
    if ts is not None:
        rows.append(Row("tsat", "saturation temperature", ts, "temperature"))
    elif inputs.temperature is None:
        raise CalcError(
            f"no saturation temperature at {p / 1e3:g} kPa absolute (the saturation line runs "
            f"{steam.PSAT_MIN:.0f} Pa to 22.064 MPa); give a temperature for properties"
        )
    if inputs.temperature is not None:
        t = inputs.temperature.value
        rows.append(Row("temperature", "temperature", t, "temperature"))
        if ts is None and p > steam.P_CRITICAL:
            res.state = "supercritical"
            res.notes.append("above the critical pressure: no saturation line, no superheat")
        elif ts is None:
            res.state = "vapour"
            res.notes.append(
                f"below the triple-point pressure ({steam.PSAT_MIN:.1f} Pa): no saturation "
                "line, no superheat; water above 273.15 K is vapour there"
            )
        else:
            sh = t - ts
            if abs(sh) <= SATURATED_BAND:
                res.state = "saturated"
            else:
                res.state = "superheated steam" if sh > 0 else "subcooled water"
            rows.append(Row("superheat", "superheat", sh, "tdiff", res.state))
            if SATURATED_BAND < abs(sh) < INSTRUMENT_BAND:
                res.notes.append(
                    f"T is within {INSTRUMENT_BAND:g} K of Tsat: exact figures say "
                    f"{res.state}, but a measured point this close is near saturation for "
                    "the monitor (an instrument cannot tell the phases apart there)"
                )
        if res.state == "saturated":
            res.notes.append(
                f"T is within {SATURATED_BAND} K of Tsat: pressure and temperature do not fix "
                "the phase (wet steam or boiling water); see the saturated values"
            )
        else:
            props = steam.properties(p, t)
            where = f"single phase (IF97 region {props.region})"
            rows.append(Row("enthalpy", "enthalpy", props.h, "enthalpy", where))
            rows.append(Row("entropy", "entropy", props.s, "entropy"))
            rows.append(Row("density", "density", props.density, "density"))
            rows.append(Row("cp", "specific heat cp", props.cp, "entropy"))
    if ts is not None:
        _saturated_rows(rows, p)
    return res


def _gauge_row(rows: list[Row], p: float, baro: float) -> None:
    g = p - baro
    if g >= 0:
        rows.append(Row("pressure_gauge", "as gauge pressure", g, "pressure", "", "gauge"))
    else:
        rows.append(Row("pressure_vacuum", "as vacuum", -g, "pressure", "", "vacuum"))


def _saturated_rows(rows: list[Row], p: float) -> None:
    from edge import steam

    try:
        sat = steam.saturated(p)
    except SteamError as exc:
        rows.append(Row("saturated_unavailable", str(exc), math.nan, "none"))
        return
    rows += [
        Row("hf", "saturated liquid enthalpy hf", sat.hf, "enthalpy"),
        Row("hg", "saturated vapour enthalpy hg", sat.hg, "enthalpy"),
        Row("hfg", "latent heat hfg", sat.hfg, "enthalpy"),
        Row("sf", "saturated liquid entropy sf", sat.sf, "entropy"),
        Row("sg", "saturated vapour entropy sg", sat.sg, "entropy"),
        Row("density_f", "saturated liquid density", sat.density_f, "density"),
        Row("density_g", "saturated vapour density", sat.density_g, "density"),
    ]


# ---------------------------------------------------------------- output


def display_units(inputs: Inputs) -> dict[str, str]:
    """The units to answer in, following what the user typed."""
    p_unit = inputs.pressure.unit if inputs.pressure else None
    t_unit = inputs.temperature.unit if inputs.temperature else None
    imperial = (p_unit in IMPERIAL_PRESSURES) or (p_unit is None and t_unit == "degF")
    return {
        "pressure": p_unit or ("psi" if imperial else "kPa"),
        "temperature": t_unit or ("degF" if imperial else "degC"),
        "tdiff": "delta degF" if (t_unit or ("degF" if imperial else "degC")) == "degF" else "K",
        "enthalpy": "Btu/lb" if imperial else "kJ/kg",
        "entropy": "Btu/(lb R)" if imperial else "kJ/(kg K)",
        "density": "lb/ft3" if imperial else "kg/m3",
    }


def number(x: float) -> str:
    """Six significant figures (at most six decimals), no exponent."""
    if x == 0 or not math.isfinite(x):
        return "0" if x == 0 else str(x)
    decimals = min(max(0, 5 - math.floor(math.log10(abs(x)))), 6)
    return f"{x:.{decimals}f}"


_SUFFIX = {"absolute": "abs", "gauge": "gauge", "vacuum": "vac"}


def table(inputs: Inputs, res: Result) -> str:
    du = display_units(inputs)
    lines = ["steam-edge calc (IAPWS-IF97)"]
    width = max(len(r.label) for r in res.rows if r.kind != "none")
    for r in res.rows:
        if r.kind == "none":
            lines.append(f"  {r.label}")
            continue
        unit, label, value = du[r.kind], r.label, r.value
        if r.key == "superheat" and value < 0:
            label, value = "subcooling", -value
        text = number(units.from_si(value, unit, r.kind))
        if r.reference:
            unit = f"{unit} {_SUFFIX[r.reference]}"
        note = f"  {r.note}" if r.note else ""
        lines.append(f"  {label:<{width}}  {text:>12} {unit:<12}{note}".rstrip())
    lines += [f"  {n}" for n in res.notes]
    lines.append(f"  ({ADVISORY})")
    return "\n".join(lines)


def as_json(inputs: Inputs, res: Result) -> str:
    out: dict[str, object] = {
        "inputs": {
            k: v
            for k, v in (
                ("pressure", inputs.pressure_text),
                ("temperature", inputs.temperature_text),
            )
            if v
        }
    }
    for r in res.rows:
        if r.kind == "none":
            out.setdefault("notes", []).append(r.label)  # type: ignore[union-attr]
            continue
        item: dict[str, object] = {"value": r.value, "unit": SI_UNITS[r.kind]}
        if r.reference:
            item["reference"] = r.reference
        if r.key == "barometer":
            item["origin"] = inputs.baro_origin
        out[r.key] = item
    if res.state:
        out["state"] = res.state
    if res.notes:
        out.setdefault("notes", []).extend(res.notes)  # type: ignore[attr-defined]
    out["advisory"] = ADVISORY
    return json.dumps(out, indent=2)


def main(args: argparse.Namespace) -> int:
    try:
        inputs = read_inputs(args)
        res = calculate(inputs)
    except (CalcError, UnitError, SteamError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    print(as_json(inputs, res) if args.json else table(inputs, res))
    return 0
