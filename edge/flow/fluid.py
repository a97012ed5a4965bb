"""The state of the fluid in a flow line, from a point's absolute pressure and temperature.
Pure.

The phase comes from derive's judgement (``edge.derive.phase``, the measured ``phase`` of
the point beside its configured ``state``), so a flow and its point never disagree:

=====================  =====================  ==============================================
configured             measured phase         fluid for the flow
=====================  =====================  ==============================================
superheated            superheated            steam at (p, T) (IF97)
superheated            near_saturation        dry saturated vapour at p, ``uncertain``
superheated            subcooled              wet steam: ``bad`` (wet_steam), no figure
saturated              saturated / no T       dry saturated vapour at p (dryness not measured)
saturated              off the band           dry saturated vapour, ``uncertain``
subcooled              subcooled              water at (p, T)
subcooled              near_saturation        saturated liquid at p, ``uncertain``
subcooled              superheated            flashing: ``bad`` (flashing), no figure
any but saturated      supercritical          single phase at (p, T)
=====================  =====================  ==============================================

A DP meter or vortex meter in two-phase flow reads wrong by an unknown amount, so wet
steam is never given a number. Without a point (``steam-edge flow``), :func:`fluid_state`
judges with :func:`wet_steam`: T at or below Tsat(p) on steam is wet.

Viscosity from IAPWS R12-08 (``edge.flow.viscosity``, industrial formulation without the
critical enhancement; near the critical point the state is uncertain, reason
``near_critical``); isentropic exponent kappa = w^2 / (p v) from the IF97 speed of sound
(``edge.steam``), for vapour and supercritical states; a liquid has none (epsilon = 1).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from edge import steam
from edge.derive.phase import FLASHING, NEAR, OFF_SATURATION, SUPERCRITICAL_REASON, WET_STEAM
from edge.errors import SteamError
from edge.flow import viscosity as visc
from edge.model import (
    GOOD,
    NEAR_SATURATION,
    NO_DATA,
    OUTSIDE_IF97,
    SATURATED,
    SUBCOOLED,
    SUPERCRITICAL,
    SUPERHEATED,
    PointState,
    Quality,
    bad,
    uncertain,
    worst,
)

__all__ = [
    "FLASHING",
    "NEAR_CRITICAL",
    "WET_STEAM",
    "FluidState",
    "fluid_of_point",
    "fluid_state",
    "wet_steam",
]

NEAR_CRITICAL = "near_critical"
SINGLE, VAPOUR, LIQUID = "single", "vapour", "liquid"


@dataclass(frozen=True, slots=True)
class FluidState:
    """Upstream state of the metered fluid (SI)."""

    pressure: float  # Pa absolute
    temperature: float  # K
    density: float  # kg/m3
    viscosity: float  # Pa s
    kappa: float | None  # isentropic exponent; None for a liquid
    enthalpy: float  # J/kg
    quality: Quality


def wet_steam(p: float, t: float) -> bool:
    """True when steam at (p, T) cannot be dry superheated steam: T at or below Tsat(p)."""
    if p > steam.PSAT_MAX or p < steam.PSAT_MIN:
        return False
    return t - steam.tsat_unchecked(p) <= steam.TWO_PHASE_TOLERANCE


def _bad(p: float, t: float, reason: str) -> FluidState:
    nan = math.nan
    return FluidState(p, t, nan, nan, None, nan, bad(reason))


def _fluid(kind: str, p: float, t: float, quality: Quality, kappa_needed: bool) -> FluidState:
    """The fluid as ``kind``: single phase at (p, T), or saturated vapour or liquid at p."""
    kappa: float | None = None
    try:
        if kind == SINGLE:
            props = steam.properties(p, t)
            if kappa_needed and props.region != 1:  # w^2 / (p v), v from the call above
                w = steam.speed_of_sound(p, t)
                kappa = w * w * props.density / p
        else:
            t = steam.tsat(p)
            if kind == VAPOUR:
                props = steam.saturated_vapour(p)
                if kappa_needed:
                    kappa = steam.saturated_vapour_isentropic_exponent(p)
            else:
                props = steam.saturated_liquid(p)
    except SteamError:
        return _bad(p, t, OUTSIDE_IF97)
    rho = props.density
    if visc.near_critical(t, rho):
        quality = worst(quality, uncertain(NEAR_CRITICAL))
    return FluidState(p, t, rho, visc.viscosity(t, rho), kappa, props.h, quality)


# (configured state, measured phase) -> (fluid kind or None: no figure, quality cap)
_UNC_NEAR = uncertain(NEAR)
_UNC_OFF = uncertain(OFF_SATURATION)
_JUDGED: dict[tuple[str, str | None], tuple[str | None, Quality | None]] = {
    (SUPERHEATED, SUPERHEATED): (SINGLE, None),
    (SUPERHEATED, NEAR_SATURATION): (VAPOUR, _UNC_NEAR),
    (SUPERHEATED, SUBCOOLED): (None, bad(WET_STEAM)),
    (SUPERHEATED, SUPERCRITICAL): (SINGLE, None),
    (SATURATED, SATURATED): (VAPOUR, None),
    (SATURATED, None): (VAPOUR, None),
    (SATURATED, SUPERHEATED): (VAPOUR, _UNC_OFF),
    (SATURATED, SUBCOOLED): (VAPOUR, _UNC_OFF),
    (SATURATED, SUPERCRITICAL): (None, bad(SUPERCRITICAL_REASON)),
    (SUBCOOLED, SUBCOOLED): (SINGLE, None),
    (SUBCOOLED, NEAR_SATURATION): (LIQUID, _UNC_NEAR),
    (SUBCOOLED, SUPERHEATED): (None, bad(FLASHING)),
    (SUBCOOLED, SUPERCRITICAL): (SINGLE, None),
}


def fluid_of_point(point: PointState, *, kappa_needed: bool = True) -> FluidState | None:
    """The fluid at a point derive evaluated this pass, judged by its measured phase; None
    when its pressure (or, off a saturated point, its temperature) is not usable."""
    pr = point.get("pressure")
    if not pr.usable or pr.value is None:
        return None
    p, quality = pr.value, pr.quality
    t = math.nan
    if point.state != SATURATED or point.phase is not None:
        tr = point.get("temperature")
        if not tr.usable or tr.value is None:
            if point.state != SATURATED:
                return None
        else:
            t, quality = tr.value, worst(quality, tr.quality)
    kind, cap = _JUDGED.get((point.state, point.phase), (None, bad(NO_DATA)))
    if cap is not None:
        quality = worst(quality, cap)
    if kind is None:
        return FluidState(p, t, math.nan, math.nan, None, math.nan, quality)
    return _fluid(kind, p, t, quality, kappa_needed)


def fluid_state(
    state: str, p: float, t: float | None, inputs: Quality = GOOD, *, kappa_needed: bool = True
) -> FluidState:
    """The fluid for a configured ``state`` (superheated, saturated, subcooled) at absolute
    pressure ``p`` (Pa) and temperature ``t`` (K; None: dry saturated steam), without a
    point's phase judgement (``steam-edge flow``): steam at or below Tsat is wet, water at
    or above it flashes."""
    tt = math.nan if t is None else t
    if state == SATURATED or t is None:
        return _fluid(VAPOUR, p, tt, inputs, kappa_needed)
    if state == SUPERHEATED and wet_steam(p, tt):
        return _bad(p, tt, WET_STEAM)
    liquid_line = state == SUBCOOLED and steam.PSAT_MIN <= p <= steam.PSAT_MAX
    if liquid_line and tt >= steam.tsat_unchecked(p) - steam.TWO_PHASE_TOLERANCE:
        return _bad(p, tt, FLASHING)
    return _fluid(SINGLE, p, tt, inputs, kappa_needed)
