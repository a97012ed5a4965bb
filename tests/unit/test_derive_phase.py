"""edge.derive phase judgement: measured phase beside the configured one, never the other
phase's properties as good, supercritical states."""

from __future__ import annotations

import itertools
import math

import pytest
from CoolProp.CoolProp import PropsSI

from edge import steam
from edge.derive import PointSpec, evaluate
from edge.model import GOOD, BarometerReading, Level, Sample, bad, uncertain

BARO = BarometerReading(101_325.0, "fixed", GOOD)


def spec(state: str, *, band: float | None = None, tolerance: float = 2.0) -> PointSpec:
    return PointSpec("pt", state, tolerance, "p", "absolute", "t", "bar", "degC", band=band)


def point(state: str, p: float, t: float, **kw):
    snapshot = {"p": Sample("p", p, GOOD, 0.0, 0.0), "t": Sample("t", t, GOOD, 0.0, 0.0)}
    return evaluate([spec(state, **kw)], snapshot, BARO)["pt"]


P10 = 10e5 + 101_325.0  # 10 barg
TS10 = steam.tsat(P10)


def test_superheated_point_clearly_above_tsat_is_superheated_and_good():
    """5 K above Tsat with a 2 K band: superheated, single-phase vapour properties, good."""
    s = point("superheated", P10, TS10 + 5.0)
    assert s.phase == "superheated" and s.quality == GOOD
    assert s.readings["density"].value == steam.properties(P10, TS10 + 5.0).density


@pytest.mark.parametrize("offset", [-0.3, 0.0, 0.3, 1.9])
def test_superheated_point_within_the_band_is_near_saturation(offset):
    """Within the band: saturated vapour properties, quality uncertain (near_saturation)."""
    s = point("superheated", P10, TS10 + offset)
    g = steam.saturated_vapour(P10)
    assert s.phase == "near_saturation"
    assert s.readings["enthalpy"].value == g.h and s.readings["density"].value == g.density
    assert s.readings["density"].quality == uncertain("near_saturation")
    assert s.quality == GOOD  # the measurements stand; only the properties are in doubt


def test_superheated_point_clearly_below_tsat_is_wet_steam():
    """A superheated point 3 K below Tsat is wet steam: h and density bad (wet_steam)."""
    s = point("superheated", P10, TS10 - 3.0)
    assert s.phase == "subcooled"
    assert s.readings["enthalpy"] == s.readings["enthalpy"].__class__(
        None, bad("wet_steam"), "J/kg"
    )
    assert s.readings["density"].quality == bad("wet_steam")
    assert s.quality == bad("wet_steam")
    assert s.readings["superheat"].quality == GOOD  # the measurement itself stands


def test_subcooled_point_clearly_above_tsat_is_flashing():
    """A subcooled point 3 K above Tsat flashes: h and density bad (flashing)."""
    s = point("subcooled", P10, TS10 + 3.0)
    assert s.phase == "superheated"
    assert s.readings["density"].quality == bad("flashing")
    assert s.quality == bad("flashing")


def test_subcooled_point_within_the_band_gets_saturated_liquid():
    """Within the band a subcooled point carries saturated liquid, uncertain."""
    s = point("subcooled", P10, TS10 + 0.3)
    f = steam.saturated_liquid(P10)
    assert s.phase == "near_saturation"
    assert s.readings["density"].value == f.density
    assert s.readings["density"].quality == uncertain("near_saturation")


def test_band_is_configurable_per_point():
    """A 0.5 K band makes 1 K of superheat plain superheated."""
    assert point("superheated", P10, TS10 + 1.0, band=0.5).phase == "superheated"
    assert point("superheated", P10, TS10 + 1.0).phase == "near_saturation"


def test_saturated_point_off_its_band_keeps_vapour_properties_uncertain():
    """A saturated point 3 K off: measured subcooled, saturated vapour uncertain; the point
    quality stays (the saturation deviation alarm speaks for it)."""
    s = point("saturated", P10, TS10 - 3.0)
    assert s.phase == "subcooled" and s.quality == GOOD
    assert s.readings["enthalpy"].value == steam.saturated_vapour(P10).h
    assert s.readings["enthalpy"].quality == uncertain("off_saturation")


def test_supercritical_point_matches_coolprop_if97():
    """25 MPa, 800 K: h, s, density to 1e-6 of CoolProp's IF97 backend."""
    s = point("superheated", 25e6, 800.0)
    assert s.phase == "supercritical" and s.quality == GOOD
    for key, prop in (("enthalpy", "H"), ("entropy", "S"), ("density", "D")):
        # CoolProp IF97 backend
        ref = PropsSI(prop, "P", 25e6, "T", 800.0, "IF97::Water")
        assert s.readings[key].value == pytest.approx(ref, rel=1e-6)
        assert s.readings[key].quality == GOOD


def test_supercritical_region3_state_matches_coolprop_if97():
    """25 MPa, 660 K (IF97 region 3): h, s, density agree with CoolProp's IF97 backend
    within its region 3 backward equations (about 1e-5)."""
    s = point("superheated", 25e6, 660.0)
    assert s.phase == "supercritical" and s.quality == GOOD
    for key, prop in (("enthalpy", "H"), ("entropy", "S"), ("density", "D")):
        # CoolProp IF97 backend (backward equations in region 3)
        ref = PropsSI(prop, "P", 25e6, "T", 660.0, "IF97::Water")
        assert s.readings[key].value == pytest.approx(ref, rel=1e-4)


def test_saturated_point_above_the_critical_pressure_is_bad():
    """A drum cannot be saturated above 22.064 MPa: the point is bad (supercritical)."""
    s = point("saturated", 25e6, 650.0)
    assert s.quality == bad("supercritical") and s.phase == "supercritical"


@pytest.mark.parametrize("t", [5000.0, 1e30])
def test_impossible_temperature_is_bad_not_superheat(t):
    """5000 K and 1e30 K lie beyond IF97's 2273.15 K (R7-97, 2012, section 4): bad."""
    s = point("superheated", P10, t)
    assert s.quality == bad("out_of_range")
    assert s.readings["superheat"].value is None
    assert s.readings["temperature"].quality == bad("out_of_range")


def _coolprop_phase_props(state: str, p: float, t: float, ts: float) -> list[tuple]:
    """The (h, rho) a point of this configured phase may carry, per CoolProp IF97: the
    single-phase state at (p, T) when CoolProp puts it in that phase, else the saturated
    state of that phase."""
    out = []
    want_gas = state in ("superheated", "saturated")
    q = 1 if want_gas else 0
    # CoolProp IF97 backend
    out.append(
        (PropsSI("H", "P", p, "Q", q, "IF97::Water"), PropsSI("D", "P", p, "Q", q, "IF97::Water"))
    )
    if state != "saturated" and abs(t - ts) > 1e-6:
        phase = PropsSI("Phase", "P", p, "T", t, "IF97::Water")
        gas = phase in (5.0, 6.0)  # CoolProp iphase_gas / iphase_supercritical_gas
        if gas == want_gas:
            out.append(
                (
                    PropsSI("H", "P", p, "T", t, "IF97::Water"),
                    PropsSI("D", "P", p, "T", t, "IF97::Water"),
                )
            )
    return out


def test_no_good_point_carries_the_other_phase_sweep():
    """Sweep Tsat +- 2 K at 1..40 barg, every configured phase, the default band and a
    0.5 K one: whatever has quality good carries properties of its stated phase, per
    CoolProp's IF97 backend."""
    checked = 0
    for i in range(40):
        p = (1.0 + i) * 1e5 + 101_325.0
        ts = steam.tsat(p)
        for k in range(-20, 21):
            t = ts + k * 0.1
            for state, band in itertools.product(
                ("saturated", "superheated", "subcooled"), (None, 0.5)
            ):
                s = point(state, p, t, band=band)
                h, rho = s.readings["enthalpy"], s.readings["density"]
                if h.quality.level is not Level.GOOD:
                    continue
                allowed = _coolprop_phase_props(state, p, t, ts)
                assert any(
                    math.isclose(h.value, ah, rel_tol=1e-8)
                    and math.isclose(rho.value, ar, rel_tol=1e-8)
                    for ah, ar in allowed
                ), (state, p, t)
                checked += 1
    assert checked > 3000  # the sweep did look at good points
