"""The ``flows[]`` section: flow meters on the points' pressure and temperature. The models,
and the checks across the file (tags, points, geometry, units), each problem with its path.

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

from typing import TYPE_CHECKING, Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, ValidationInfo

from edge import units
from edge.config.signals import suggest
from edge.config.yaml_lines import Path, format_path
from edge.errors import UnitError

if TYPE_CHECKING:
    from edge.config.schema import Point, Tag

__all__ = ["EnergyReference", "Flow", "Fuel", "check_flows"]

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


class _Model(BaseModel):  # the schema's Model (it imports this module, so not imported here)
    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True)


class EnergyReference(_Model):
    """h_ref: one of a point (feedwater, condensate), liquid water at a temperature (and
    pressure, 101.325 kPa by default) or a fixed enthalpy."""

    point: str | None = None
    temperature: Temperature | None = None
    pressure: Annotated[units.Quantity, _quantity("pressure", "15 bara")] | None = None
    enthalpy: Enthalpy | None = None


class Fuel(_Model):
    """Fuel input for the direct-method boiler efficiency."""

    tag: str  # fuel flow: a mass-flow or a volume-flow tag
    heating_value: str  # J/kg-like for a mass-flow tag, J/m3-like for a volume-flow tag
    basis: Literal["gross", "net"]


class Flow(_Model):
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


# --- checks -------------------------------------------------------------------------------


def check_flows(
    flows: list[Flow | None],
    tags: dict[str, Tag],
    points: dict[str, Point],
    known: set[str],
    out: Problems,
) -> None:
    """Every problem of the ``flows`` section."""
    first: dict[str, Path] = {}
    for i, f in enumerate(flows):
        if f is None:
            continue
        p: Path = ("flows", i)
        name = f.name
        if not name.strip() or any(c.isspace() for c in name) or "/" in name:
            out.append(((*p, "name"), "a flow name must be a word without spaces or '/'"))
        if name in first:
            out.append(
                (
                    (*p, "name"),
                    f"duplicate flow name '{name}' (first at {format_path(first[name])})",
                )
            )
        else:
            first[name] = p
        _check_flow(p, f, tags, points, known, out)


def _tag(
    p: Path, key: str, name: str, tags: dict[str, Tag], known: set[str], out: Problems
) -> tuple[Tag | None, str | None]:
    tag = tags.get(name)
    if tag is None:
        if name not in known:
            out.append(((*p, key), f"no tag named '{name}'{suggest(name, tags)}"))
        return None, None
    try:
        return tag, units.unit_info(tag.unit).kind
    except UnitError:
        return None, None  # reported on the tag


def _check_flow(
    p: Path, f: Flow, tags: dict[str, Tag], points: dict[str, Point], known: set[str], out: Problems
) -> None:
    point = points.get(f.point)
    if point is None:
        if f.point not in known:
            out.append(((*p, "point"), f"no point named '{f.point}'{suggest(f.point, points)}"))
    elif point.state != "saturated" and point.temperature is None:
        out.append(((*p, "point"), f"point '{f.point}' has no temperature tag; a flow needs one"))
    element = f.meter in ELEMENT_METERS
    need = ("dp", "pipe", "bore") if element else ("signal",)
    foreign = (
        ("signal", "design_density")
        if element
        else (
            "dp",
            "taps",
            "convergent",
            "pipe",
            "bore",
            "pipe_material",
            "bore_material",
        )
    )
    for key in need:
        if getattr(f, key) is None:
            out.append(((*p, key), f"a {f.meter} flow needs {key}"))
    for key in foreign:
        if getattr(f, key) is not None:
            out.append(((*p, key), f"{key} is not for a {f.meter} flow"))
    if f.meter == "orifice" and f.taps is None:
        out.append(((*p, "taps"), "an orifice needs taps: corner, flange or d_d2"))
    if f.meter != "orifice" and f.taps is not None and element:
        out.append(((*p, "taps"), "taps are for an orifice"))
    if f.meter == "venturi" and f.convergent is None:
        out.append(
            (
                (*p, "convergent"),
                "a Venturi tube needs convergent: as_cast, machined or rough_welded",
            )
        )
    if f.meter != "venturi" and f.convergent is not None and element:
        out.append(((*p, "convergent"), "convergent is for a Venturi tube"))
    if f.meter == "dp-compensated" and f.design_density is None:
        out.append(((*p, "design_density"), "a dp-compensated flow needs the design density"))
    if f.design_density is not None and f.design_density.value <= 0:
        out.append(((*p, "design_density"), "must be more than 0 kg/m3"))
    cutoff_kind = "pressure"
    if f.dp is not None:
        tag, kind = _tag(p, "dp", f.dp, tags, known, out)
        if tag is not None and (kind != "pressure" or tag.reference != "differential"):
            out.append(
                (
                    (*p, "dp"),
                    f"tag '{f.dp}' must be a pressure with reference: differential "
                    f"(it is {kind}{', ' + tag.reference if tag.reference else ''})",
                )
            )
    if f.signal is not None:
        tag, kind = _tag(p, "signal", f.signal, tags, known, out)
        want = {"volumetric": ("volume_flow",), "mass": ("mass_flow",)}.get(
            f.meter, ("mass_flow", "volume_flow")
        )
        if tag is not None:
            if kind not in want:
                out.append(
                    (
                        (*p, "signal"),
                        f"tag '{f.signal}' has unit {tag.unit!r}; a {f.meter} flow needs a "
                        f"{' or '.join(w.replace('_', ' ') for w in want)} unit",
                    )
                )
            else:
                cutoff_kind = kind or cutoff_kind
    if f.pipe is not None and f.bore is not None:
        if f.pipe <= 0 or f.bore <= 0:
            out.append(((*p, "bore"), "diameters must be more than 0"))
        elif f.bore >= f.pipe:
            out.append(
                (
                    (*p, "bore"),
                    f"the bore ({f.bore * 1e3:g} mm) must be smaller than the pipe "
                    f"({f.pipe * 1e3:g} mm)",
                )
            )
    for key in ("pipe_material", "bore_material"):
        text = getattr(f, key)
        if text is not None:
            from edge.flow.materials import coefficient

            try:
                coefficient(text)
            except ValueError as exc:
                out.append(((*p, key), str(exc)))
    if f.low_flow_cutoff is not None:
        try:
            q = units.parse(f.low_flow_cutoff, cutoff_kind)
            if q.value < 0:
                out.append(((*p, "low_flow_cutoff"), "cannot be negative"))
        except UnitError as exc:
            out.append(((*p, "low_flow_cutoff"), str(exc)))
    if f.max_gap <= 0:
        out.append(((*p, "max_gap"), "must be longer than 0 s"))
    _check_reference(p, f, points, known, out)
    _check_fuel(p, f, tags, known, out)


def _check_reference(
    p: Path, f: Flow, points: dict[str, Point], known: set[str], out: Problems
) -> None:
    r = f.energy_reference
    if r is None:
        return
    rp: Path = (*p, "energy_reference")
    given = [k for k in ("point", "temperature", "enthalpy") if getattr(r, k) is not None]
    if len(given) != 1:
        out.append((rp, "give one of point, temperature or enthalpy"))
    if r.pressure is not None and r.temperature is None:
        out.append(((*rp, "pressure"), "a pressure goes with a temperature"))
    if r.pressure is not None and r.pressure.reference != "absolute":
        out.append(((*rp, "pressure"), "write the reference pressure absolute, e.g. '15 bara'"))
    if r.point is not None:
        ref = points.get(r.point)
        if ref is None:
            if r.point not in known:
                out.append(
                    ((*rp, "point"), f"no point named '{r.point}'{suggest(r.point, points)}")
                )
        elif ref.state != "subcooled" or ref.temperature is None:
            out.append(
                (
                    (*rp, "point"),
                    f"point '{r.point}' must be a subcooled point with a temperature "
                    "(feedwater, condensate)",
                )
            )
    if r.temperature is not None:
        from edge import steam
        from edge.errors import SteamError

        pressure = r.pressure.value if r.pressure is not None else units.STANDARD_ATMOSPHERE
        try:
            if pressure <= steam.PSAT_MAX and r.temperature >= steam.tsat(pressure):
                out.append(
                    (
                        (*rp, "temperature"),
                        "water at that temperature and pressure is not liquid; give a higher "
                        "pressure",
                    )
                )
        except SteamError as exc:
            out.append(((*rp, "temperature"), str(exc)))


def _check_fuel(p: Path, f: Flow, tags: dict[str, Tag], known: set[str], out: Problems) -> None:
    if f.fuel is None:
        return
    fp: Path = (*p, "fuel")
    tag, kind = _tag(fp, "tag", f.fuel.tag, tags, known, out)
    if tag is None:
        return
    if kind not in ("mass_flow", "volume_flow"):
        out.append(((*fp, "tag"), f"tag '{f.fuel.tag}' has unit {tag.unit!r}, not a flow unit"))
        return
    try:
        hv = heating_value(f.fuel, kind)
    except UnitError as exc:
        per = "kg (e.g. '42 MJ/kg')" if kind == "mass_flow" else "m3 (e.g. '35.8 MJ/m3')"
        out.append(
            (
                (*fp, "heating_value"),
                f"{exc}; a {kind.replace('_', ' ')} fuel needs energy per {per}",
            )
        )
        return
    if hv.value <= 0:
        out.append(((*fp, "heating_value"), "must be more than 0"))


def flow_names(data: dict[str, Any]) -> set[str]:
    """Every flow name written in the file."""
    items = data.get("flows")
    return {
        f["name"]
        for f in (items if isinstance(items, list) else [])
        if isinstance(f, dict) and isinstance(f.get("name"), str)
    }
