"""The state of the fluid in a flow line, from a point's absolute pressure and temperature.
Pure.

* ``steam`` on a superheated point: IF97 at (p, T). A temperature at or below the
  saturation temperature means wet steam: the density IF97 gives at (p, T) would be that of
  water, and a DP or vortex meter reads wrong in two-phase flow, so the state is bad with
  reason ``wet_steam`` (the judgement is :func:`wet_steam`, one small function the point
  phase judgement can replace).
* ``steam`` on a saturated point: dry saturated vapour at p (the usual assumption for a
  saturated main; the dryness is not measured, the temperature is not needed).
* ``water`` on a subcooled point (feedwater, condensate): IF97 liquid at (p, T); a
  temperature at or above saturation (flashing) is bad, reason ``not_liquid``.

Viscosity from IAPWS R12-08 (``edge.flow.viscosity``, industrial formulation without the
critical enhancement; near the critical point the state is uncertain, reason
``near_critical``); isentropic exponent kappa = w^2 / (p v) from IF97 (``edge.steam``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from edge import steam
from edge.errors import SteamError
from edge.flow import viscosity as visc
from edge.model import GOOD, OUTSIDE_IF97, Quality, bad, uncertain, worst

__all__ = ["NEAR_CRITICAL", "NOT_LIQUID", "WET_STEAM", "FluidState", "fluid_state", "wet_steam"]

WET_STEAM = "wet_steam"
NOT_LIQUID = "not_liquid"
NEAR_CRITICAL = "near_critical"


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


def fluid_state(
    state: str, p: float, t: float | None, inputs: Quality = GOOD, *, kappa_needed: bool = True
) -> FluidState:
    """The fluid on a point whose configured state is ``state`` (superheated, saturated,
    subcooled) at absolute pressure ``p`` (Pa) and temperature ``t`` (K, None on a
    saturated point without a temperature tag); ``inputs`` is the quality of p and T.
    Without ``kappa_needed`` (meters that give flow) the isentropic exponent is skipped."""
    tt = math.nan if t is None else t
    try:
        if state == "saturated":
            g = steam.saturated_vapour(p)
            tt = steam.tsat(p)
            kappa: float | None = (
                steam.saturated_vapour_isentropic_exponent(p) if kappa_needed else None
            )
            rho, h = g.density, g.h
        elif state == "superheated":
            if wet_steam(p, tt):
                return _bad(p, tt, WET_STEAM)
            props = steam.properties(p, tt)
            kappa = None
            if kappa_needed:  # w^2 / (p v), with v from the call above
                w = steam.speed_of_sound(p, tt)
                kappa = w * w * props.density / p
            rho, h = props.density, props.h
        else:
            if p <= steam.PSAT_MAX and tt >= steam.tsat(p) - steam.TWO_PHASE_TOLERANCE:
                return _bad(p, tt, NOT_LIQUID)
            props = steam.properties(p, tt)
            kappa = None
            rho, h = props.density, props.h
    except SteamError:
        return _bad(p, tt, OUTSIDE_IF97)
    mu = visc.viscosity(tt, rho)
    quality = inputs
    if visc.near_critical(tt, rho):
        quality = worst(quality, uncertain(NEAR_CRITICAL))
    return FluidState(p, tt, rho, mu, kappa, h, quality)
