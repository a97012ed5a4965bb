"""Density compensation of a flow signal from a meter that already gives flow. Pure.

* ``dp-compensated``: a DP transmitter with square-root extraction, scaled at a design
  density. Its signal is proportional to sqrt(dp / rho_design) for volume and to
  sqrt(dp * rho_design) for mass, while the true figures go with the actual rho, so
  mass flow  m = m_signal * sqrt(rho / rho_design)   (a signal in kg/s),
  and from a volume signal  m = q_signal * sqrt(rho * rho_design)   (m3/s at design).
* ``volumetric`` (vortex, turbine: actual volume): m = q_v * rho.
* ``mass`` (Coriolis): passed through; the fluid is still judged (wet steam is bad).
"""

from __future__ import annotations

import math

__all__ = ["dp_compensated_mass", "dp_compensated_volume", "mass", "volumetric"]


def dp_compensated_mass(signal: float, density: float, design_density: float) -> float:
    """kg/s from a mass-flow signal (kg/s) scaled at ``design_density``."""
    return signal * math.sqrt(density / design_density)


def dp_compensated_volume(signal: float, density: float, design_density: float) -> float:
    """kg/s from a volume-flow signal (m3/s) scaled at ``design_density``."""
    return signal * math.sqrt(density * design_density)


def volumetric(signal: float, density: float) -> float:
    """kg/s from an actual volume flow (m3/s)."""
    return signal * density


def mass(signal: float) -> float:
    """kg/s from a mass-flow signal (kg/s): unchanged."""
    return signal
