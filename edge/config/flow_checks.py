"""Checks of the ``flows[]`` section across the file: the point and tags a flow names,
its geometry, materials, units and energy reference, each problem with its path. Pure,
like the other checks; the models are in ``flows``."""

from __future__ import annotations

from typing import TYPE_CHECKING

from edge import units
from edge.config.flows import (
    ELEMENT_METERS,
    Flow,
    heating_value,
)
from edge.config.signals import suggest
from edge.config.yaml_lines import Path, format_path
from edge.errors import UnitError

if TYPE_CHECKING:
    from edge.config.schema import Point, Tag

__all__ = ["check_flows"]

Problems = list[tuple[Path, str]]


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
