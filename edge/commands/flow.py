"""steam-edge flow: one-off flow figures per ISO 5167 (2003) and for compensated flow signals.

    steam-edge flow orifice --pipe 102.26 mm --bore 60 mm --taps flange --dp 25 kPa \\
        --pressure 10 bara --temperature 200 degC
    steam-edge flow nozzle --kind long_radius --pipe 150 mm --bore 90 mm --dp 40 kPa \\
        --pressure 12 barg --temperature 250 degC --baro 98 kPa
    steam-edge flow venturi --convergent machined --pipe 200 mm --bore 110 mm --dp 30 kPa \\
        --pressure 40 bara --temperature 400 degC --json
    steam-edge flow compensate --meter volumetric --signal 600 m3/h --pressure 10 bara \\
        --temperature 200 degC

The fluid is steam unless ``--water`` is given: superheated at (p, T), or dry saturated at
p when no temperature is given; a steam temperature at or below Tsat is wet steam, and the
answer is then bad (exit 1), never a number. Density from IF97, viscosity from IAPWS R12-08
(industrial formulation, critical enhancement not applied), isentropic exponent
kappa = w^2 / (p v) from the IF97 speed of sound. Outside the standard's limits of use the
figure is printed as uncertain, each failed limit named with its clause (exit 0).
``--json`` prints SI values as ``{"value": ..., "unit": ...}``.
"""

from __future__ import annotations

import argparse
import json
import sys
from typing import Any

from edge import units
from edge.barometer import STANDARD_ATMOSPHERE, standard_atmosphere, to_absolute
from edge.commands.calc import split_quantities
from edge.config.rules import altitude_problem, barometer_problem
from edge.errors import FlowError, SteamError, UnitError
from edge.flow import compensation, energy, iso5167, materials
from edge.flow.fluid import FluidState, fluid_state

EXIT_USAGE = 2
EXIT_BAD = 1
ADVISORY = "advisory figures only; never a substitute for certified safety controls"


def _common(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--pressure",
        nargs="+",
        required=True,
        metavar="P",
        help="upstream pressure with its reference: 10 bara, 9 barg, 150 psig",
    )
    p.add_argument(
        "--temperature",
        nargs="+",
        metavar="T",
        help="upstream temperature (leave out for dry saturated steam)",
    )
    p.add_argument("--water", action="store_true", help="the fluid is liquid water")
    where = p.add_mutually_exclusive_group()
    where.add_argument("--baro", nargs="+", metavar="P", help="barometric pressure for gauge")
    where.add_argument(
        "--altitude", nargs="+", metavar="LENGTH", help="site altitude for the standard atmosphere"
    )
    p.add_argument(
        "--reference-temperature",
        nargs="+",
        metavar="T",
        help="h_ref: liquid water at this temperature (default 0 degC)",
    )
    p.add_argument(
        "--reference-pressure",
        nargs="+",
        metavar="P",
        help="pressure of the reference water (absolute; default 101.325 kPa)",
    )
    p.add_argument("--json", action="store_true", help="SI values with their units")


def _element(p: argparse.ArgumentParser) -> None:
    p.add_argument(
        "--pipe", nargs="+", required=True, metavar="D", help="pipe bore D, e.g. 102.26 mm"
    )
    p.add_argument(
        "--bore", nargs="+", required=True, metavar="d", help="throat or bore d, e.g. 60 mm"
    )
    p.add_argument(
        "--dp", nargs="+", required=True, metavar="DP", help="differential pressure, e.g. 25 kPa"
    )
    p.add_argument(
        "--pipe-material", help=f"pipe material ({', '.join(materials.EXPANSION)} or '12e-6 1/K')"
    )
    p.add_argument("--bore-material", help="element material, as --pipe-material")
    p.add_argument(
        "--measured-at",
        nargs="+",
        metavar="T",
        help="temperature D and d were measured at (20 degC)",
    )


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.formatter_class = argparse.RawDescriptionHelpFormatter
    parser.epilog = (
        "examples:\n"
        "  steam-edge flow orifice --pipe 102.26 mm --bore 60 mm --taps flange --dp 25 kPa "
        "--pressure 10 bara --temperature 200 degC\n"
        "  steam-edge flow compensate --meter volumetric --signal 600 m3/h --pressure 10 bara "
        "--temperature 200 degC --json"
    )
    sub = parser.add_subparsers(dest="element", metavar="ELEMENT", required=True)
    o = sub.add_parser("orifice", help="orifice plate, ISO 5167-2 (Reader-Harris/Gallagher)")
    o.add_argument("--taps", required=True, choices=iso5167.TAPS)
    _element(o)
    _common(o)
    n = sub.add_parser("nozzle", help="ISA 1932 or long radius nozzle, ISO 5167-3")
    n.add_argument("--kind", required=True, choices=("isa1932", "long_radius"))
    _element(n)
    _common(n)
    v = sub.add_parser("venturi", help="classical Venturi tube, ISO 5167-4")
    v.add_argument("--convergent", required=True, choices=iso5167.CONVERGENTS)
    _element(v)
    _common(v)
    c = sub.add_parser("compensate", help="density compensation of a flow signal")
    c.add_argument("--meter", required=True, choices=("dp-compensated", "volumetric", "mass"))
    c.add_argument(
        "--signal",
        nargs="+",
        required=True,
        metavar="Q",
        help="the meter's flow: 3 t/h (mass) or 600 m3/h (volume)",
    )
    c.add_argument(
        "--design-density",
        nargs="+",
        metavar="RHO",
        help="density the dp-compensated signal was scaled at, e.g. 5.15 kg/m3",
    )
    _common(c)


# --- reading ------------------------------------------------------------------------------


def _q(words: list[str] | None, kind: str, what: str) -> units.Quantity | None:
    if not words:
        return None
    chunks = split_quantities(words)
    if len(chunks) != 1:
        raise FlowError(f"{what}: give one value with its unit, got {' '.join(words)!r}")
    try:
        return units.parse(chunks[0], kind)
    except UnitError as exc:
        raise FlowError(f"{what}: {exc}") from exc


def _baro(args: argparse.Namespace) -> tuple[float, str]:
    if args.baro:
        q = _q(args.baro, "pressure", "--baro")
        assert q is not None
        if q.reference not in (None, "absolute"):
            raise FlowError(f"--baro is an absolute pressure, not {q.reference}")
        if (why := barometer_problem(q.value)) is not None:
            raise FlowError(f"--baro: {why}")
        return q.value, "given with --baro"
    if args.altitude:
        q = _q(args.altitude, "length", "--altitude")
        assert q is not None
        if (why := altitude_problem(q.value)) is not None:
            raise FlowError(f"--altitude: {why}")
        return standard_atmosphere(q.value), f"standard atmosphere at {q.value:g} m"
    return STANDARD_ATMOSPHERE, "standard atmosphere at sea level (give --baro or --altitude)"


def _absolute(args: argparse.Namespace) -> tuple[float, float, str]:
    q = _q(args.pressure, "pressure", "--pressure")
    assert q is not None
    if q.reference is None:
        raise FlowError(
            f"--pressure {' '.join(args.pressure)!r} does not say gauge or absolute; write "
            "e.g. '10 bara' or '9 barg'"
        )
    baro, baro_text = _baro(args)
    if q.reference == "absolute":
        return q.value, baro, "absolute as given"
    return to_absolute(q.value, q.reference, baro), baro, baro_text


def _fluid(args: argparse.Namespace, p: float) -> FluidState:
    t = _q(args.temperature, "temperature", "--temperature")
    if args.water:
        if t is None:
            raise FlowError("--water needs --temperature")
        return fluid_state("subcooled", p, t.value)
    return fluid_state("superheated" if t is not None else "saturated", p, t.value if t else None)


def _reference(args: argparse.Namespace) -> tuple[float, str]:
    t = _q(args.reference_temperature, "temperature", "--reference-temperature")
    pq = _q(args.reference_pressure, "pressure", "--reference-pressure")
    if pq is not None and t is None:
        raise FlowError("--reference-pressure goes with --reference-temperature")
    if pq is not None and pq.reference != "absolute":
        raise FlowError("--reference-pressure is absolute, e.g. 15 bara")
    t_k, p_pa = energy.DEFAULT_REFERENCE
    text = "liquid water at 0 degC, 101.325 kPa (the default)"
    if t is not None:
        t_k = t.value
        p_pa = pq.value if pq is not None else p_pa
        text = f"liquid water at {t_k - 273.15:g} degC, {p_pa / 1e3:g} kPa abs"
    try:
        return energy.liquid_enthalpy(t_k, p_pa), text
    except SteamError as exc:
        raise FlowError(f"energy reference: {exc}") from exc


# --- computing ----------------------------------------------------------------------------


def _si(value: float | None, unit: str) -> dict[str, Any] | None:
    return None if value is None else {"value": value, "unit": unit}


def compute(args: argparse.Namespace) -> dict[str, Any]:
    """Every figure of one command as a JSON-ready dict (SI)."""
    p, baro, baro_text = _absolute(args)
    fluid = _fluid(args, p)
    h_ref, ref_text = _reference(args)
    out: dict[str, Any] = {
        "advisory": ADVISORY,
        "pressure_absolute": _si(p, "Pa"),
        "barometer": {"value": baro, "unit": "Pa", "origin": baro_text},
        "temperature": _si(fluid.temperature, "K"),
        "quality": fluid.quality.name,
        "reason": fluid.quality.reason,
    }
    if fluid.quality.level == 0:
        return out
    out["density"] = _si(fluid.density, "kg/m3")
    out["viscosity"] = _si(fluid.viscosity, "Pa s")
    if fluid.kappa is not None:
        out["isentropic_exponent"] = _si(fluid.kappa, "1")
    if args.element == "compensate":
        mass_flow = _compensate(args, fluid, out)
    else:
        mass_flow = _element_flow(args, fluid, out)
    out["mass_flow"] = _si(mass_flow, "kg/s")
    out["energy_rate"] = _si(energy.energy_rate(mass_flow, fluid.enthalpy, h_ref), "W")
    out["energy_reference"] = {"enthalpy": _si(h_ref, "J/kg"), "what": ref_text}
    return out


def _element_flow(args: argparse.Namespace, fluid: FluidState, out: dict[str, Any]) -> float:
    if args.element == "orifice":
        element = iso5167.Element("orifice", taps=args.taps)
    elif args.element == "nozzle":
        element = iso5167.Element(f"{args.kind}_nozzle")  # type: ignore[arg-type]
    else:
        element = iso5167.Element("venturi", convergent=args.convergent)
    pipe = _q(args.pipe, "length", "--pipe")
    bore = _q(args.bore, "length", "--bore")
    dp = _q(args.dp, "pressure", "--dp")
    assert pipe is not None and bore is not None and dp is not None
    if dp.reference is not None:
        raise FlowError("--dp is a difference: write it without g/a, e.g. 25 kPa")
    if not 0 < bore.value < pipe.value:
        raise FlowError("--bore must be smaller than --pipe, both more than 0")
    at = _q(args.measured_at, "temperature", "--measured-at")
    t_ref = at.value if at is not None else materials.REFERENCE_TEMPERATURE
    try:
        lam_d = materials.coefficient(args.pipe_material) if args.pipe_material else 0.0
        lam_b = materials.coefficient(args.bore_material) if args.bore_material else 0.0
    except ValueError as exc:
        raise FlowError(str(exc)) from exc
    t = fluid.temperature
    d_pipe = materials.at_temperature(pipe.value, lam_d, t, t_ref)
    d_bore = materials.at_temperature(bore.value, lam_b, t, t_ref)
    r = iso5167.solve(
        element,
        pipe=d_pipe,
        bore=d_bore,
        dp=dp.value,
        p1=fluid.pressure,
        density=fluid.density,
        viscosity=fluid.viscosity,
        kappa=fluid.kappa,
    )
    out["element"] = {
        "kind": element.kind,
        "taps": element.taps,
        "convergent": element.convergent,
        "standard": element.part,
        "pipe": _si(d_pipe, "m"),
        "bore": _si(d_bore, "m"),
        "beta": r.beta,
        "expansion_corrected": bool(lam_d or lam_b),
    }
    out["differential_pressure"] = _si(dp.value, "Pa")
    out["discharge_coefficient"] = _si(r.discharge_coefficient, "1")
    out["expansibility"] = _si(r.expansibility, "1")
    out["reynolds"] = _si(r.reynolds, "1")
    out["limits"] = [
        {
            "name": lim.name,
            "value": lim.value,
            "low": lim.low,
            "high": lim.high,
            "ok": lim.ok,
            "clause": lim.clause,
        }
        for lim in r.limits
    ]
    out["within_limits"] = r.within
    if not r.within:
        out["quality"] = "uncertain" if out["quality"] == "good" else out["quality"]
        out["reason"] = "outside_limits:" + ",".join(lim.name for lim in r.broken())
    return r.mass_flow


def _compensate(args: argparse.Namespace, fluid: FluidState, out: dict[str, Any]) -> float:
    chunks = split_quantities(args.signal)
    if len(chunks) != 1:
        raise FlowError("--signal: give one flow with its unit, e.g. 3 t/h or 600 m3/h")
    try:
        sig = units.parse(chunks[0])
    except UnitError as exc:
        raise FlowError(f"--signal: {exc}") from exc
    if sig.kind not in ("mass_flow", "volume_flow"):
        raise FlowError(f"--signal: {chunks[0]!r} is not a flow (t/h, kg/s, m3/h ...)")
    if args.meter == "mass" and sig.kind != "mass_flow":
        raise FlowError("--meter mass takes a mass-flow signal (kg/s, t/h)")
    if args.meter == "volumetric" and sig.kind != "volume_flow":
        raise FlowError("--meter volumetric takes a volume-flow signal (m3/h, l/s)")
    out["signal"] = _si(sig.value, "kg/s" if sig.kind == "mass_flow" else "m3/s")
    if args.meter == "mass":
        return compensation.mass(sig.value)
    if args.meter == "volumetric":
        return compensation.volumetric(sig.value, fluid.density)
    design = _q(args.design_density, "density", "--design-density")
    if design is None or design.value <= 0:
        raise FlowError("--meter dp-compensated needs --design-density, e.g. 5.15 kg/m3")
    out["design_density"] = _si(design.value, "kg/m3")
    if sig.kind == "volume_flow":
        return compensation.dp_compensated_volume(sig.value, fluid.density, design.value)
    return compensation.dp_compensated_mass(sig.value, fluid.density, design.value)


# --- printing -----------------------------------------------------------------------------


def _v(out: dict[str, Any], key: str) -> float:
    return out[key]["value"]


def _title(args: argparse.Namespace) -> str:
    if args.element == "orifice":
        return f"orifice, {args.taps} taps (ISO 5167-2:2003)"
    if args.element == "nozzle":
        return f"{args.kind.replace('_', ' ')} nozzle (ISO 5167-3:2003)"
    if args.element == "venturi":
        return f"classical Venturi tube, {args.convergent} convergent (ISO 5167-4:2003)"
    return f"{args.meter} flow signal, density compensated"


def _limit_text(lim: dict[str, Any]) -> str:
    mm = lim["name"].endswith("_diameter")
    k, unit = (1e3, " mm") if mm else (1.0, "")
    lo = f"{lim['low'] * k:g}{unit} <= " if lim["low"] is not None else ""
    hi = f" <= {lim['high'] * k:g}{unit}" if lim["high"] is not None else ""
    return f"{lo}{lim['name']}{hi}: {lim['value'] * k:.6g}{unit} ({lim['clause']})"


def render(out: dict[str, Any], title: str) -> str:
    lines = []
    el = out.get("element")
    lines.append(f"{title}; {ADVISORY}")
    lines.append(
        f"  pressure            {_v(out, 'pressure_absolute') / 1e5:.6g} bar abs "
        f"(barometer: {out['barometer']['origin']})"
    )
    lines.append(f"  temperature         {_v(out, 'temperature') - 273.15:.6g} degC")
    if out["quality"] == "bad":
        lines.append(f"  BAD: {out['reason']} (no flow figure)")
        return "\n".join(lines)
    lines.append(f"  density             {_v(out, 'density'):.6g} kg/m3 (IAPWS-IF97)")
    lines.append(
        f"  viscosity           {_v(out, 'viscosity') * 1e6:.6g} uPa s (IAPWS R12-08, "
        "no critical enhancement)"
    )
    if "isentropic_exponent" in out:
        lines.append(
            f"  isentropic exponent {_v(out, 'isentropic_exponent'):.5g} (w^2/(p v), IF97)"
        )
    if el:
        note = "" if el["expansion_corrected"] else " (no material given: not corrected)"
        lines.append(
            f"  D, d                {el['pipe']['value'] * 1e3:.6g} mm, "
            f"{el['bore']['value'] * 1e3:.6g} mm at flowing temperature{note}"
        )
        lines.append(f"  beta                {el['beta']:.5g}")
        lines.append(f"  C                   {_v(out, 'discharge_coefficient'):.6g}")
        lines.append(f"  epsilon             {_v(out, 'expansibility'):.6g}")
        lines.append(f"  Re_D                {_v(out, 'reynolds'):.4g}")
    m = _v(out, "mass_flow")
    lines.append(f"  mass flow           {m:.6g} kg/s = {m * 3.6:.6g} t/h")
    lines.append(
        f"  energy rate         {_v(out, 'energy_rate') / 1e3:.6g} kW above "
        f"{out['energy_reference']['what']}"
    )
    if el:
        lines.append("limits of use:")
        for lim in out["limits"]:
            lo = f"{lim['low']:g} <= " if lim["low"] is not None else ""
            hi = f" <= {lim['high']:g}" if lim["high"] is not None else ""
            mark = "ok " if lim["ok"] else "OUT"
            lines.append(f"  {mark} {lo}{lim['name']}{hi}: {lim['value']:.6g} ({lim['clause']})")
        if not out["within_limits"]:
            lines.append("  UNCERTAIN: outside the standard's limits of use")
    return "\n".join(lines)


def main(args: argparse.Namespace) -> int:
    try:
        out = compute(args)
    except (FlowError, UnitError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    if args.json:
        print(json.dumps(out, indent=2))
    else:
        print(render(out, _title(args)))
    return EXIT_BAD if out["quality"] == "bad" else 0
