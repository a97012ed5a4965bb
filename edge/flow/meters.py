"""Configured flows, compiled, and one pass over them. Pure.

``compile_flows(config)`` turns the ``flows[]`` section into :class:`FlowSpec` values once;
``evaluate(specs, points, snapshot)`` computes every flow from the points derive made this
pass (absolute pressure and temperature with their quality) and the latest tag samples (dp,
flow signals, fuel). A flow's quality is the worst of its inputs, of the fluid judgement
(wet steam is bad) and of the standard's limits (outside them: uncertain, the reason names
the limits that failed). It never raises on plant data.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from edge.errors import ConfigError, ConfigProblem, SteamError
from edge.flow import compensation, energy, iso5167, materials
from edge.flow.fluid import FluidState, fluid_of_point
from edge.flow.totalizer import Totals, accumulate
from edge.model import (
    CONFIG,
    NO_DATA,
    PointState,
    Quality,
    Sample,
    bad,
    uncertain,
    worst,
)

__all__ = [
    "ELEMENT_METERS",
    "METERS",
    "SIGNAL_METERS",
    "FlowSpec",
    "FlowState",
    "compile_flows",
    "evaluate",
    "evaluate_one",
    "finite",
    "step_totals",
]

ELEMENT_METERS = ("orifice", "isa1932_nozzle", "long_radius_nozzle", "venturi")
SIGNAL_METERS = ("dp-compensated", "volumetric", "mass")
METERS = ELEMENT_METERS + SIGNAL_METERS
OUTSIDE_LIMITS = "outside_limits"  # reason prefix: outside the standard's limits of use


@dataclass(frozen=True, slots=True)
class Reference:
    """Where h_ref comes from: a point (its P and T), or a fixed enthalpy."""

    point: str | None = None
    enthalpy: float = 0.0  # J/kg when point is None


@dataclass(frozen=True, slots=True)
class Fuel:
    tag: str
    heating_value: float  # J/kg (mass-flow tag) or J/m3 (volume-flow tag)
    basis: str  # gross | net


@dataclass(frozen=True, slots=True)
class FlowSpec:
    """One compiled flow."""

    name: str
    meter: str
    point: str
    state: str  # the point's configured state: superheated | saturated | subcooled
    element: iso5167.Element | None = None
    dp: str | None = None  # dp tag
    signal: str | None = None  # flow-signal tag
    signal_kind: str = "mass_flow"  # mass_flow | volume_flow
    pipe: float = 0.0  # m at measured_at
    bore: float = 0.0
    pipe_expansion: float = 0.0  # 1/K
    bore_expansion: float = 0.0
    measured_at: float = materials.REFERENCE_TEMPERATURE
    design_density: float | None = None
    cutoff: float = 0.0  # dp (Pa) or signal (SI) at or below which the flow is zero
    reference: Reference = Reference()
    fuel: Fuel | None = None
    max_gap: float = 10.0  # s: a longer gap between passes is not measured


@dataclass(frozen=True, slots=True)
class FlowState:
    """What one pass computed for one flow (SI); None where nothing could be computed."""

    name: str
    meter: str
    quality: Quality
    mass_flow: float | None  # kg/s
    energy_rate: float | None  # W
    fluid: FluidState | None = None
    result: iso5167.FlowResult | None = None  # elements only
    dp: float | None = None  # Pa
    signal: float | None = None  # SI (kg/s or m3/s)
    reference_enthalpy: float | None = None  # J/kg
    efficiency: float | None = None  # ratio, direct method
    efficiency_quality: Quality | None = None
    fuel_power: float | None = None  # W

    @property
    def usable(self) -> bool:
        return self.mass_flow is not None and self.quality.level > 0


# --- compiling ----------------------------------------------------------------------------


def compile_flows(config: Any) -> dict[str, FlowSpec]:
    """FlowSpecs by name from a checked config (``config.flows``); a problem the checks let
    through lands in one ConfigError."""
    points = {p.name: p for p in config.points}
    tags = config.tags()
    out: dict[str, FlowSpec] = {}
    problems: list[ConfigProblem] = []
    for i, f in enumerate(getattr(config, "flows", ())):
        try:
            out[f.name] = _compile(f, points, tags)
        except (KeyError, ValueError) as exc:
            problems.append(ConfigProblem(path=f"flows[{i}]", message=str(exc)))
    if problems:
        raise ConfigError(problems)
    return out


def _expansion(material: str | None) -> float:
    return materials.coefficient(material) if material else 0.0


def _compile(f: Any, points: Mapping[str, Any], tags: Mapping[str, Any]) -> FlowSpec:
    from edge import units

    point = points[f.point]
    element = None
    if f.meter in ELEMENT_METERS:
        element = iso5167.Element(f.meter, taps=f.taps, convergent=f.convergent)
    signal_kind = "mass_flow"
    if f.signal is not None:
        signal_kind = units.unit_info(tags[f.signal].unit).kind
    ref = Reference(enthalpy=energy.liquid_enthalpy(*energy.DEFAULT_REFERENCE))
    r = f.energy_reference
    if r is not None:
        if r.point is not None:
            ref = Reference(point=r.point)
        elif r.enthalpy is not None:
            ref = Reference(enthalpy=r.enthalpy)
        elif r.temperature is not None:
            p = r.pressure.value if r.pressure is not None else energy.DEFAULT_REFERENCE[1]
            try:
                ref = Reference(enthalpy=energy.liquid_enthalpy(r.temperature, p))
            except SteamError as exc:
                raise ValueError(f"energy_reference: {exc}") from exc
    fuel = None
    if f.fuel is not None:
        from edge.config.flows import heating_value

        fuel_kind = units.unit_info(tags[f.fuel.tag].unit).kind
        fuel = Fuel(f.fuel.tag, heating_value(f.fuel, fuel_kind).value, f.fuel.basis)
    cutoff = f.cutoff
    return FlowSpec(
        name=f.name,
        meter=f.meter,
        point=f.point,
        state=point.state,
        element=element,
        dp=f.dp,
        signal=f.signal,
        signal_kind=signal_kind,
        pipe=f.pipe or 0.0,
        bore=f.bore or 0.0,
        pipe_expansion=_expansion(f.pipe_material),
        bore_expansion=_expansion(f.bore_material),
        measured_at=f.measured_at,
        design_density=f.design_density.value if f.design_density is not None else None,
        cutoff=cutoff,
        reference=ref,
        fuel=fuel,
        max_gap=f.max_gap,
    )


# --- one pass -----------------------------------------------------------------------------


def _tag(snapshot: Mapping[str, Sample], name: str) -> tuple[float | None, Quality]:
    s = snapshot.get(name)
    if s is None:
        return None, bad(NO_DATA)
    if not s.usable:
        return None, s.quality if s.quality.level == 0 else bad(NO_DATA)
    return s.value, s.quality


def _point_fluid(
    point: PointState | None, kappa_needed: bool = False
) -> tuple[FluidState | None, Quality]:
    if point is None:
        return None, bad(CONFIG)
    fluid = fluid_of_point(point, kappa_needed=kappa_needed)
    if fluid is None:
        return None, point.quality if point.quality.level == 0 else bad(NO_DATA)
    return fluid, fluid.quality


def evaluate_one(
    spec: FlowSpec,
    points: Mapping[str, PointState],
    snapshot: Mapping[str, Sample],
) -> FlowState:
    """One flow from this pass's points and samples."""
    fluid, quality = _point_fluid(points.get(spec.point), kappa_needed=spec.element is not None)
    if fluid is None or quality.level == 0:
        return FlowState(spec.name, spec.meter, quality, None, None, fluid)
    result = None
    dp = sig = None
    if spec.element is not None:
        assert spec.dp is not None
        dp, q = _tag(snapshot, spec.dp)
        quality = worst(quality, q)
        if dp is None:
            return FlowState(spec.name, spec.meter, quality, None, None, fluid)
        t = fluid.temperature
        pipe = materials.at_temperature(spec.pipe, spec.pipe_expansion, t, spec.measured_at)
        bore = materials.at_temperature(spec.bore, spec.bore_expansion, t, spec.measured_at)
        result = iso5167.solve(
            spec.element,
            pipe=pipe,
            bore=bore,
            dp=0.0 if dp <= spec.cutoff else dp,
            p1=fluid.pressure,
            density=fluid.density,
            viscosity=fluid.viscosity,
            kappa=fluid.kappa,
        )
        broken = result.broken()
        if broken:
            names = ",".join(lim.name for lim in broken)
            quality = worst(quality, uncertain(f"{OUTSIDE_LIMITS}:{names}"))
        mass_flow = result.mass_flow
    else:
        assert spec.signal is not None
        sig, q = _tag(snapshot, spec.signal)
        quality = worst(quality, q)
        if sig is None:
            return FlowState(spec.name, spec.meter, quality, None, None, fluid)
        value = 0.0 if sig <= spec.cutoff else sig
        if spec.meter == "mass":
            mass_flow = compensation.mass(value)
        elif spec.meter == "volumetric":
            mass_flow = compensation.volumetric(value, fluid.density)
        else:
            design = spec.design_density or fluid.density
            if spec.signal_kind == "volume_flow":
                mass_flow = compensation.dp_compensated_volume(value, fluid.density, design)
            else:
                mass_flow = compensation.dp_compensated_mass(value, fluid.density, design)
    h_ref: float | None = spec.reference.enthalpy
    if spec.reference.point is not None:
        ref_point = points.get(spec.reference.point)
        ref_fluid, ref_q = _point_fluid(ref_point)
        h_ref = ref_fluid.enthalpy if ref_fluid is not None and ref_q.level > 0 else None
    e_rate = energy.energy_rate(mass_flow, fluid.enthalpy, h_ref) if h_ref is not None else None
    eff = eff_q = fuel_power = None
    if spec.fuel is not None and e_rate is not None:
        fuel_flow, fq = _tag(snapshot, spec.fuel.tag)
        if fuel_flow is not None:
            fuel_power = fuel_flow * spec.fuel.heating_value
            eff = energy.efficiency(e_rate, fuel_flow, spec.fuel.heating_value)
            eff_q = worst(quality, fq)
        else:
            eff_q = fq
    return FlowState(
        spec.name,
        spec.meter,
        quality,
        mass_flow,
        e_rate,
        fluid,
        result,
        dp,
        sig,
        h_ref,
        eff,
        eff_q,
        fuel_power,
    )


def evaluate(
    specs: Mapping[str, FlowSpec],
    points: Mapping[str, PointState],
    snapshot: Mapping[str, Sample],
) -> dict[str, FlowState]:
    """Every configured flow from this pass's points and samples."""
    return {name: evaluate_one(spec, points, snapshot) for name, spec in specs.items()}


def step_totals(
    specs: Mapping[str, FlowSpec],
    totals: Mapping[str, Totals],
    flows: Mapping[str, FlowState],
    now: float,
) -> dict[str, Totals]:
    """Every flow's totals brought up to ``now`` with this pass's figures; a bad flow counts
    its time as not measured. Totals of flows no longer configured are dropped."""
    out: dict[str, Totals] = {}
    for name, spec in specs.items():
        state = flows.get(name)
        before = totals.get(name) or Totals()
        if state is None or not state.usable:
            out[name] = accumulate(before, now, None, None, max_gap=spec.max_gap)
        else:
            out[name] = accumulate(
                before,
                now,
                state.mass_flow,
                state.energy_rate,
                uncertain=state.quality.level == 1,
                max_gap=spec.max_gap,
            )
    return out


def finite(value: float | None) -> float | None:
    """``value`` when it is a finite number, else None (JSON and metrics never get NaN)."""
    return value if value is not None and math.isfinite(value) else None
