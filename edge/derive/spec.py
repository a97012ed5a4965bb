"""Point specs: each point's tags resolved once per config. Pure.

``compile_points(config)`` turns the config's points into :class:`PointSpec` objects (tag
names, pressure reference, the units the tags are written in, tolerance and saturation
band); ``absolute`` is the one place a reading in its reference becomes an absolute
pressure. Every other derive module imports from here; this one imports none of them.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from edge import config, units
from edge.errors import ConfigError, ConfigProblem, UnitError

__all__ = ["REFERENCES", "TEMPERATURE_UNITS", "PointSpec", "compile_points"]

REFERENCES = ("absolute", "gauge", "vacuum")
TEMPERATURE_UNITS = ("K", "degC", "degF")


@dataclass(frozen=True, slots=True)
class PointSpec:
    """One point, with its tags resolved. Built once per config by ``compile_points``."""

    name: str
    state: str  # saturated | superheated | subcooled
    tolerance: float  # K, allowed |T - Tsat| on a saturated point
    pressure_tag: str
    reference: str  # absolute | gauge | vacuum: how the pressure tag reads
    temperature_tag: str | None = None
    pressure_unit: str = "Pa"  # canonical unit of the pressure tag, for hints
    temperature_unit: str = "K"  # canonical unit of the temperature tag, for hints
    band: float | None = None  # K around Tsat judged as saturation; None: the tolerance
    unit_has_reference: bool = False  # the tag writes its reference in its unit ("barg")
    # the band in use (``band`` or the tolerance), derived once for the hot path
    sat_band: float = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        b = self.band if self.band is not None else self.tolerance
        ok = isinstance(b, float | int) and b >= 0.0  # NaN or negative (unchecked): none
        object.__setattr__(self, "sat_band", float(b) if ok else 0.0)


def compile_points(cfg: config.Config) -> list[PointSpec]:
    """Resolve every point's tags. Raises ConfigError listing every unresolvable point."""
    tags = cfg.tags()
    problems: list[ConfigProblem] = []
    specs: list[PointSpec] = []
    for i, point in enumerate(cfg.points):
        ptag = tags.get(point.pressure)
        if ptag is None:
            problems.append(ConfigProblem(f"points[{i}].pressure", f"no tag {point.pressure!r}"))
            continue
        if ptag.reference is None:
            problems.append(
                ConfigProblem(
                    f"points[{i}].pressure",
                    f"tag {ptag.name!r} has no reference: set absolute, gauge or vacuum",
                )
            )
            continue
        t_unit = "K"
        if point.temperature is not None:
            ttag = tags.get(point.temperature)
            if ttag is None:
                problems.append(
                    ConfigProblem(f"points[{i}].temperature", f"no tag {point.temperature!r}")
                )
                continue
            t_unit = _canonical(ttag.unit, "temperature")
        specs.append(
            PointSpec(
                name=point.name,
                state=point.state,
                tolerance=point.tolerance,
                pressure_tag=ptag.name,
                reference=ptag.reference,
                temperature_tag=point.temperature,
                pressure_unit=_canonical(ptag.unit, "pressure"),
                temperature_unit=t_unit,
                band=point.band,
                unit_has_reference=_has_reference(ptag.unit),
            )
        )
    if problems:
        raise ConfigError(problems)
    return specs


def _canonical(unit: str, kind: str) -> str:
    """The canonical symbol of a tag's unit (``"psig"`` -> ``"psi"``), for hints."""
    try:
        return units.unit_info(unit, kind).symbol
    except UnitError:
        return unit


def _has_reference(unit: str) -> bool:
    try:
        return units.unit_info(unit, "pressure").reference is not None
    except UnitError:
        return False
