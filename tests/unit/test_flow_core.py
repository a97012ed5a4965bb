"""edge.flow: fluid judgement, compensation, energy, thermal expansion and totalizers."""

from __future__ import annotations

import math

import pytest
from iapws import IAPWS97

from edge import steam
from edge.flow import compensation, energy, materials, totalizer
from edge.flow.fluid import FLASHING, WET_STEAM, fluid_state
from edge.model import Level


def test_superheated_steam_state():
    """Superheated steam at 10 bara, 200 degC: IF97 density, R12-08 viscosity, kappa."""
    f = fluid_state("superheated", 10e5, 473.15)
    st = IAPWS97(P=1.0, T=473.15)
    # iapws library IAPWS97
    assert f.density == pytest.approx(st.rho, rel=1e-9)
    assert f.viscosity == pytest.approx(st.mu, rel=1e-6)
    assert f.kappa == pytest.approx(steam.isentropic_exponent(10e5, 473.15))
    assert f.quality.good


def test_superheated_point_below_saturation_is_wet_steam():
    """A superheated point whose temperature is below Tsat is bad, reason wet_steam."""
    f = fluid_state("superheated", 10e5, steam.tsat(10e5) - 0.5)
    assert f.quality.level is Level.BAD
    assert f.quality.reason == WET_STEAM
    assert math.isnan(f.density)


def test_saturated_point_uses_dry_saturated_vapour():
    """A saturated point's steam is dry saturated vapour at its pressure; T is not needed."""
    f = fluid_state("saturated", 10e5, None)
    assert f.density == pytest.approx(steam.saturated_vapour(10e5).density)
    assert f.temperature == pytest.approx(steam.tsat(10e5))


def test_subcooled_water_above_saturation_flashes():
    """Feedwater above its saturation temperature is bad, reason flashing."""
    assert fluid_state("subcooled", 10e5, steam.tsat(10e5) + 1).quality.reason == FLASHING
    water = fluid_state("subcooled", 10e5, 378.15)
    assert water.kappa is None
    assert water.density == pytest.approx(steam.properties(10e5, 378.15).density)


def test_dp_compensation():
    """q = q_signal * sqrt(rho / rho_design) for a mass signal; m = q * sqrt(rho rho_d) for
    a volume signal."""
    assert compensation.dp_compensated_mass(2.0, 4.0, 5.0) == pytest.approx(2.0 * math.sqrt(0.8))
    assert compensation.dp_compensated_volume(0.5, 4.0, 5.0) == pytest.approx(0.5 * math.sqrt(20))
    assert compensation.volumetric(0.25, 5.0) == 1.25
    assert compensation.mass(3.0) == 3.0


def test_default_reference_is_water_at_zero_celsius():
    """The default h_ref is IF97 liquid water at 0 degC, 101.325 kPa (about 0.1 kJ/kg)."""
    h = energy.liquid_enthalpy(*energy.DEFAULT_REFERENCE)
    # iapws library IAPWS97
    assert h == pytest.approx(IAPWS97(P=0.101325, T=273.15).h * 1e3, rel=1e-9)
    assert 0.0 < h < 200.0


def test_energy_rate_and_efficiency():
    """E = m (h - h_ref); the direct-method efficiency divides by fuel flow x heating value."""
    e = energy.energy_rate(2.0, 2_800e3, 400e3)
    assert e == pytest.approx(4.8e6)
    assert energy.efficiency(e, 0.15, 40e6) == pytest.approx(0.8)
    assert energy.efficiency(e, 0.0, 40e6) is None


def test_thermal_expansion():
    """A carbon steel pipe of 100 mm at 20 degC is 100 * (1 + 11.16e-6 * 180) mm at 200 degC."""
    lam = materials.coefficient("carbon_steel")
    # AGA Report No. 3 Part 2 (2000), 6.20e-6 1/degF (from memory)
    assert lam == pytest.approx(11.16e-6)
    assert materials.at_temperature(0.1, lam, 473.15) == pytest.approx(0.1 * (1 + lam * 180))
    assert materials.coefficient("12.5e-6 1/K") == 12.5e-6


def test_unknown_material_is_refused():
    """An unknown material name is one error naming the known ones."""
    with pytest.raises(ValueError, match="carbon_steel"):
        materials.coefficient("unobtainium")


def _run(rates, times, max_gap=5.0):
    t = totalizer.Totals()
    for now, (m, e) in zip(times, rates, strict=True):
        t = totalizer.accumulate(t, now, m, e, max_gap=max_gap)
    return t


def test_totalizer_integrates_constant_flow():
    """2 kg/s for 10 s is 20 kg; 1 MW for 10 s is 10 MJ."""
    t = _run([(2.0, 1e6)] * 11, [float(i) for i in range(11)])
    assert t.mass == pytest.approx(20.0)
    assert t.energy == pytest.approx(10e6)
    assert t.not_measured == 0.0


def test_totalizer_skips_bad_stretch():
    """Intervals touching a bad pass add nothing and go to not_measured."""
    rates = [(1.0, 1.0)] * 4 + [(None, None)] * 3 + [(1.0, 1.0)] * 4
    t = _run(rates, [float(i) for i in range(11)])
    assert t.mass == pytest.approx(6.0)  # 0-3 and 7-10
    assert t.not_measured == pytest.approx(4.0)  # 3-7


def test_totalizer_gap_is_not_measured():
    """An interval longer than max_gap (monitor down) is not counted."""
    t = _run([(1.0, 1.0)] * 3, [0.0, 1.0, 60.0])
    assert t.mass == pytest.approx(1.0)
    assert t.not_measured == pytest.approx(59.0)


def test_totalizer_counts_uncertain_time():
    """Uncertain passes count in the totals and in the uncertain seconds."""
    t = totalizer.Totals()
    for now in range(4):
        t = totalizer.accumulate(t, float(now), 1.0, 1.0, uncertain=now >= 2, max_gap=5.0)
    assert t.mass == pytest.approx(3.0)
    assert t.uncertain == pytest.approx(2.0)  # 1-2 and 2-3: an uncertain end makes it so


def test_totalizer_reset():
    """A reset zeroes the totals and counts on from the reset time."""
    t = _run([(1.0, 1.0)] * 5, [0.0, 1.0, 2.0, 3.0, 4.0])
    t = totalizer.reset(t, 4.0)
    assert (t.mass, t.energy, t.not_measured, t.since) == (0.0, 0.0, 0.0, 4.0)
    t = totalizer.accumulate(t, 6.0, 1.0, 1.0, max_gap=5.0)
    assert t.mass == pytest.approx(2.0)


def test_totalizer_counts_missed_energy_apart():
    """With the mass flow good but no energy rate (reference bad) the mass counts, the
    energy does not, and that time is energy_not_measured."""
    t = totalizer.Totals()
    for now, e in ((0.0, 1.0), (1.0, 1.0), (2.0, None), (3.0, None), (4.0, 1.0)):
        t = totalizer.accumulate(t, now, 2.0, e, max_gap=5.0)
    assert t.mass == pytest.approx(8.0)
    assert t.energy == pytest.approx(1.0)  # 0-1 only
    assert t.energy_not_measured == pytest.approx(3.0)
    assert t.not_measured == 0.0
