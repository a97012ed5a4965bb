"""Advice on a config that is valid but cannot give the figures it seems to promise. Pure.

``barometer_warnings(config)``: a point whose pressure tag reads vacuum becomes absolute
through the barometer, and the weather moves a barometer by about +-3 kPa (common
practice: 95..103 kPa at sea level over a year). A fixed or altitude barometer cannot
follow it, and near a condenser's pressure those 3 kPa are a large share of the absolute
pressure: at 10 kPa abs they shift Tsat by about 7 K. ``steam-edge check`` prints these.
"""

from __future__ import annotations

from edge import config as config_mod
from edge import units
from edge.barometer import standard_atmosphere
from edge.errors import UnitError
from edge.steam import PSAT_MAX, PSAT_MIN, tsat_unchecked

__all__ = ["WEATHER", "barometer_warnings", "weather_error"]

WEATHER = 3e3  # Pa: how far the weather moves a barometer either way
EXAMPLE_PRESSURES = (10e3, 50e3)  # Pa abs, where no range says what the point reads


def weather_error(p_abs: float, swing: float = WEATHER) -> float:
    """The largest shift of Tsat (K) that +-``swing`` Pa of barometer makes at ``p_abs``."""
    lo = min(max(p_abs - swing, PSAT_MIN), PSAT_MAX)
    hi = min(max(p_abs + swing, PSAT_MIN), PSAT_MAX)
    mid = min(max(p_abs, PSAT_MIN), PSAT_MAX)
    ts = tsat_unchecked(mid)
    return max(ts - tsat_unchecked(lo), tsat_unchecked(hi) - ts)


def barometer_warnings(cfg: config_mod.Config) -> list[str]:
    """One warning per vacuum point when the barometer is fixed or from the altitude."""
    b = cfg.barometer
    if b is None or b.tag is not None:
        return []
    if b.fixed is not None:
        baro = b.fixed.value
        kind = f"a fixed barometer ({baro / 1e3:.3g} kPa)"
    elif b.altitude is not None:
        baro = standard_atmosphere(b.altitude)
        kind = f"an altitude barometer ({baro / 1e3:.3g} kPa at {b.altitude:g} m)"
    else:
        return []
    tags = cfg.tags()
    out = []
    for point in cfg.points:
        tag = tags.get(point.pressure)
        if tag is None or tag.reference != "vacuum":
            continue
        deepest = _deepest_vacuum(tag)
        if deepest is not None:
            p_abs = max(baro - deepest, 1e3)
            where = f"at its deepest vacuum ({p_abs / 1e3:.3g} kPa abs)"
            err = weather_error(p_abs)
            shift = f"Tsat by up to {err:.1f} K {where}"
            beyond = err > point.tolerance
        else:
            errs = [(p, weather_error(p)) for p in EXAMPLE_PRESSURES]
            shift = "Tsat by " + ", ".join(f"{e:.1f} K at {p / 1e3:g} kPa abs" for p, e in errs)
            beyond = errs[0][1] > point.tolerance
        tol = f" (its tolerance is {point.tolerance:g} K)" if beyond else ""
        out.append(
            f"point {point.name}: vacuum tag {tag.name} runs on {kind}; the weather moves "
            f"the barometer by about +-{WEATHER / 1e3:g} kPa, which shifts {shift}{tol}: "
            "give the barometer a live tag (barometer.tag)"
        )
    return out


def _deepest_vacuum(tag: config_mod.Tag) -> float | None:
    """The largest vacuum reading (Pa) the tag's valid_range or scale allows, if it says."""
    span = None
    if tag.valid_range is not None:
        span = tag.valid_range
    elif tag.scale is not None:
        span = (tag.scale[2], tag.scale[3])
    if span is None:
        return None
    try:
        return max(units.to_si(v, tag.unit, "pressure") for v in span)
    except UnitError:
        return None
