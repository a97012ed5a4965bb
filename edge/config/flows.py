"""The ``flows[]`` section: flow meters on the points' pressure and temperature. The models;
the checks across the file (tags, points, geometry, units) are in ``flow_checks``.

A flow names its ``point`` (absolute pressure and temperature, and the fluid by the point's
state: superheated or saturated -> steam, subcooled -> water) and a ``meter``:

* a primary element (``orifice`` with ``taps``, ``isa1932_nozzle``, ``long_radius_nozzle``,
  ``venturi`` with ``convergent``) with a ``dp`` tag (reference ``differential``) and the
  ``pipe`` and ``bore`` diameters (measured at ``measured_at``, 20 degC by default, and
  corrected with ``pipe_material`` / ``bore_material``);
* or a meter that gives flow already, with a ``signal`` tag: ``dp-compensated`` (with
  ``design_density``), ``volumetric`` (vortex, turbine) or ``mass`` (Coriolis).
"""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BeforeValidator, ValidationInfo

from edge import units
from edge.config.fields import Model
from edge.config.yaml_lines import Path

__all__ = ["EnergyReference", "Flow", "Fuel", "flow_names", "heating_value"]

Problems = list[tuple[Path, str]]

METERS = (
    "orifice",
    "isa1932_nozzle",
    "long_radius_nozzle",
    "venturi",
    "dp-compensated",
    "volumetric",
    "mass",
)
ELEMENT_METERS = METERS[:4]
MATERIAL_HELP = "carbon_steel, stainless_304, stainless_316, monel_400 or e.g. '12.5e-6 1/K'"


def _quantity(kind: str, example: str) -> Any:
    def parse(v: Any, info: ValidationInfo) -> Any:
        if isinstance(v, units.Quantity):
            return v
        if isinstance(v, bool) or not isinstance(v, str):
            raise ValueError(f"expected a quantity with a unit, e.g. '{example}', got {v!r}")
        return units.parse(v, kind)

    return BeforeValidator(parse)


def _si(kind: str, example: str) -> Any:
    def parse(v: Any, info: ValidationInfo) -> Any:
        if isinstance(v, float) and not (info.context or {}).get("from_file"):
            return v
        if isinstance(v, bool) or not isinstance(v, str):
            raise ValueError(f"expected a quantity with a unit, e.g. '{example}', got {v!r}")
        return units.parse(v, kind).value

    return BeforeValidator(parse)


Diameter = Annotated[float, _si("length", "102.26 mm")]  # m
Temperature = Annotated[float, _si("temperature", "20 degC")]  # K
Density = Annotated[units.Quantity, _quantity("density", "5.15 kg/m3")]
Enthalpy = Annotated[units.Quantity, _quantity("enthalpy", "440 kJ/kg")]
AnyQuantity = Annotated[str, BeforeValidator(lambda v: _text(v))]


def _text(v: Any) -> str:
    if isinstance(v, bool) or not isinstance(v, str):
        raise ValueError(f"expected a quantity with a unit (e.g. '0.5 kPa', '0.1 t/h'), got {v!r}")
    return v


class EnergyReference(Model):
    """h_ref: one of a point (feedwater, condensate), liquid water at a temperature (and
    pressure, 101.325 kPa by default) or a fixed enthalpy."""

    point: str | None = None
    temperature: Temperature | None = None
    pressure: Annotated[units.Quantity, _quantity("pressure", "15 bara")] | None = None
    enthalpy: Enthalpy | None = None


class Fuel(Model):
    """Fuel input for the direct-method boiler efficiency."""

    tag: str  # fuel flow: a mass-flow or a volume-flow tag
    heating_value: str  # J/kg-like for a mass-flow tag, J/m3-like for a volume-flow tag
    basis: Literal["gross", "net"]


class Flow(Model):
    name: str
    meter: Literal[
        "orifice",
        "isa1932_nozzle",
        "long_radius_nozzle",
        "venturi",
        "dp-compensated",
        "volumetric",
        "mass",
    ]
    point: str
    dp: str | None = None  # differential-pressure tag (primary elements)
    signal: str | None = None  # flow tag (meters that give flow)
    taps: Literal["corner", "flange", "d_d2"] | None = None  # orifice
    convergent: Literal["as_cast", "machined", "rough_welded"] | None = None  # venturi
    pipe: Diameter | None = None  # D at measured_at
    bore: Diameter | None = None  # d at measured_at
    pipe_material: str | None = None
    bore_material: str | None = None
    measured_at: Temperature = 293.15
    design_density: Density | None = None  # dp-compensated
    low_flow_cutoff: AnyQuantity | None = None  # dp (elements) or flow (signals)
    energy_reference: EnergyReference | None = None
    fuel: Fuel | None = None
    max_gap: Annotated[float, _si("time", "10 s")] = 10.0  # longer pass gaps: not measured

    @property
    def cutoff(self) -> float:
        """The low-flow cut-off in SI (0 when none is given); valid after the checks."""
        if self.low_flow_cutoff is None:
            return 0.0
        return units.parse(self.low_flow_cutoff).value


def heating_value(fuel: Fuel, fuel_kind: str) -> units.Quantity:
    """The fuel's heating value: J/kg for a mass-flow tag, J/m3 for a volume-flow tag."""
    kind = "enthalpy" if fuel_kind == "mass_flow" else "energy_density"
    return units.parse(fuel.heating_value, kind)


def flow_names(data: dict[str, Any]) -> set[str]:
    """Every flow name written in the file."""
    items = data.get("flows")
    return {
        f["name"]
        for f in (items if isinstance(items, list) else [])
        if isinstance(f, dict) and isinstance(f.get("name"), str)
    }
