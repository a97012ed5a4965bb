"""Energy rate of a flow and boiler efficiency by the direct method. Pure.

Energy rate  E = m * (h - h_ref)  (W), h the enthalpy of the metered fluid and h_ref that
of the configured reference: a feedwater or condensate point, liquid water at a given
temperature and pressure, a fixed enthalpy, or by default liquid water at 0 degC and
101.325 kPa (IF97 region 1; h is about 0.1 kJ/kg there, not exactly 0).

Boiler efficiency, direct (input-output) method: eta = E / (fuel flow * heating value),
with the heating value on the basis (gross or net) the config states; the figure is only as
good as that statement, so the API shows the basis beside it.
"""

from __future__ import annotations

from edge import steam

__all__ = ["DEFAULT_REFERENCE", "efficiency", "energy_rate", "liquid_enthalpy"]

DEFAULT_REFERENCE = (273.15, 101_325.0)  # K, Pa: liquid water at 0 degC, one atmosphere


def liquid_enthalpy(t_k: float, p_pa: float) -> float:
    """Enthalpy (J/kg) of liquid water at (T, p); raises SteamError where IF97 cannot."""
    return steam.properties(p_pa, t_k).h


def energy_rate(mass_flow: float, h: float, h_ref: float) -> float:
    """W carried by ``mass_flow`` (kg/s) at enthalpy ``h`` above ``h_ref`` (J/kg)."""
    return mass_flow * (h - h_ref)


def efficiency(energy: float, fuel_flow: float, heating_value: float) -> float | None:
    """Direct-method efficiency (ratio) for an energy rate (W) and a fuel input
    ``fuel_flow * heating_value`` (W); None when no fuel flows."""
    fuel = fuel_flow * heating_value
    if fuel <= 0.0:
        return None
    return energy / fuel
