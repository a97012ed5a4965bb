"""The phase judgement: what (p, T) says the fluid is, beside what the point is configured
to carry, and which properties can be vouched for. Pure.

A point's band around Tsat (``PointSpec.sat_band``: its ``band``, by default its
tolerance) is where an instrument cannot tell the phases apart. With d = T - Tsat(p):

========================  ======================  ========================================
configured                d                       measured phase, properties
========================  ======================  ========================================
saturated                 abs(d) <= band          ``saturated``: saturated vapour at p
saturated                 abs(d) > band           ``superheated``/``subcooled``: saturated
                                                  vapour, ``uncertain`` (off_saturation)
superheated               d >= band               ``superheated``: single phase at (p, T)
superheated               abs(d) < band           ``near_saturation``: saturated vapour,
                                                  ``uncertain`` (near_saturation)
superheated               d <= -band              ``subcooled``: wet steam, h and rho from
                                                  (p, T) not defined: ``bad`` (wet_steam)
subcooled                 d <= -band              ``subcooled``: single phase at (p, T)
subcooled                 abs(d) < band           ``near_saturation``: saturated liquid,
                                                  ``uncertain`` (near_saturation)
subcooled                 d >= band               ``superheated``: the liquid flashes:
                                                  ``bad`` (flashing)
any, p > 22.064 MPa       (no Tsat)               ``supercritical``: single phase at (p, T)
                                                  (IF97 region 1, 3 or 2); a point
                                                  configured saturated is ``bad``
========================  ======================  ========================================

So a point never carries the other phase's properties with quality good. The wet_steam
and flashing judgements also set the point's quality (its quality alarm can say so); the
uncertain ones do not: the measurements themselves stand, a header running at 1 K of
superheat is not a data fault, and a saturated point outside its tolerance has its
saturation deviation alarm.
"""

from __future__ import annotations

from dataclasses import dataclass

from edge.model import (
    NEAR_SATURATION,
    SATURATED,
    SUBCOOLED,
    SUPERCRITICAL,
    SUPERHEATED,
    Level,
    Quality,
)

__all__ = [
    "FLASHING",
    "NEAR",
    "OFF_SATURATION",
    "SUPERCRITICAL_REASON",
    "WET_STEAM",
    "Judgement",
    "judge",
]

WET_STEAM = "wet_steam"  # a superheated point clearly below Tsat
FLASHING = "flashing"  # a subcooled point clearly above Tsat
NEAR = "near_saturation"  # within the band: the phase cannot be told
OFF_SATURATION = "off_saturation"  # a saturated point outside its band
SUPERCRITICAL_REASON = "supercritical"  # no saturation line above the critical pressure

# which properties: at (p, T), of saturated vapour or liquid at p, or none
SINGLE, VAPOUR, LIQUID, NONE = "single", "vapour", "liquid", "none"


@dataclass(frozen=True, slots=True)
class Judgement:
    phase: str | None  # measured phase, None without a temperature
    properties: str  # SINGLE | VAPOUR | LIQUID | NONE
    quality: Quality | None = None  # cap on the properties' quality (None: the inputs')
    point: Quality | None = None  # cap on the point's quality (None: the inputs')


_UNC_NEAR = Quality(Level.UNCERTAIN, NEAR)
_UNC_OFF = Quality(Level.UNCERTAIN, OFF_SATURATION)
_BAD_WET = Quality(Level.BAD, WET_STEAM)
_BAD_FLASH = Quality(Level.BAD, FLASHING)
_BAD_SUPER = Quality(Level.BAD, SUPERCRITICAL_REASON)

SAT_OK = Judgement(SATURATED, VAPOUR)
SAT_HIGH = Judgement(SUPERHEATED, VAPOUR, _UNC_OFF)
SAT_LOW = Judgement(SUBCOOLED, VAPOUR, _UNC_OFF)
SAT_NO_T = Judgement(None, VAPOUR)
SAT_SUPER = Judgement(SUPERCRITICAL, NONE, _BAD_SUPER, _BAD_SUPER)
SH_OK = Judgement(SUPERHEATED, SINGLE)
SH_NEAR = Judgement(NEAR_SATURATION, VAPOUR, _UNC_NEAR)
SH_WET = Judgement(SUBCOOLED, NONE, _BAD_WET, _BAD_WET)
SC_OK = Judgement(SUBCOOLED, SINGLE)
SC_NEAR = Judgement(NEAR_SATURATION, LIQUID, _UNC_NEAR)
SC_FLASH = Judgement(SUPERHEATED, NONE, _BAD_FLASH, _BAD_FLASH)
SUPER = Judgement(SUPERCRITICAL, SINGLE)
NO_T = Judgement(None, NONE)


def judge(state: str, d: float | None, band: float) -> Judgement:
    """The judgement for a point configured ``state`` whose temperature is ``d`` K from Tsat
    (None: no usable temperature). Use :func:`supercritical` above the critical pressure."""
    if d is None:
        return SAT_NO_T if state == SATURATED else NO_T
    if state == SATURATED:
        if d > band:
            return SAT_HIGH
        if d < -band:
            return SAT_LOW
        return SAT_OK
    if state == SUPERHEATED:
        if d >= band:
            return SH_OK
        if d <= -band:
            return SH_WET
        return SH_NEAR
    if d <= -band:
        return SC_OK
    if d >= band:
        return SC_FLASH
    return SC_NEAR


def supercritical(state: str, have_temperature: bool) -> Judgement:
    """The judgement above the critical pressure (no saturation line)."""
    if state == SATURATED:
        return SAT_SUPER
    return SUPER if have_temperature else NO_T
