"""The simulator's plant model: saturation physics, dynamics, determinism, scenario effects."""

from __future__ import annotations

import math
import statistics

import pytest

from edge import steam
from edge.sim.plant import BAR, ZERO_CELSIUS, Plant, PlantParams, _lag
from edge.sources.condition import NE43_FAIL_LOW, ne43

STEP = 0.1


def run(plant: Plant, seconds: float) -> list:
    """Advance ``plant`` and return (state, readings, barometer) after every step."""
    out = []
    for _ in range(round(seconds / STEP)):
        plant.step(STEP)
        out.append((plant.state, plant.readings, plant.barometer()))
    return out


def drum_abs(readings, baro: float) -> float:
    """Absolute drum pressure (Pa) from transmitter A's loop current, as the monitor reads it."""
    gauge = (readings.drum_p_ma - 4.0) / 16.0 * PlantParams().drum_span
    return gauge + baro


def test_steam_module_anchor():
    """The Tsat the plant uses is IF97's: Tsat(1 MPa) = 453.035632 K."""
    # IAPWS-IF97 (R7-97, 2012), Table 36
    assert steam.tsat(1e6) == pytest.approx(453.035632, abs=1e-6)


def test_drum_thermowell_sits_at_if97_saturation():
    """In steady running the drum thermowell equals IF97 Tsat of the drum pressure."""
    plant = Plant(seed=3)
    history = run(plant, 120.0)
    late = history[-600:]
    # the true thermowell lags Tsat by at most a few mK in steady running
    assert max(abs(s.thermowell - steam.tsat(s.drum_p)) for s, _, _ in late) < 0.05


def test_drum_reading_mean_error_is_noise_only():
    """The drum temperature reading scatters around Tsat(p) with zero mean."""
    plant = Plant(seed=4)
    history = run(plant, 120.0)[-600:]
    errors = [r.drum_t + ZERO_CELSIUS - steam.tsat(s.drum_p) for s, r, _ in history]
    assert abs(statistics.fmean(errors)) < 0.02
    assert 0.05 < statistics.pstdev(errors) < 0.2  # sensor noise, sigma 0.1 K


def test_drum_deviation_as_measured_stays_inside_tolerance_in_normal_running():
    """|T - Tsat(p measured)| on the drum stays far inside a 2 K tolerance for ten minutes."""
    plant = Plant(seed=5)
    worst = max(
        abs(r.drum_t + ZERO_CELSIUS - steam.tsat(drum_abs(r, b))) for _, r, b in run(plant, 600.0)
    )
    assert worst < 1.0


def test_drum_deviation_stays_inside_tolerance_during_load_swings():
    """Even while demand swings, the thermowell lag keeps the drum inside 2 K of Tsat."""
    plant = Plant(seed=6, scenario="load-swing")
    worst = max(
        abs(r.drum_t + ZERO_CELSIUS - steam.tsat(drum_abs(r, b))) for _, r, b in run(plant, 300.0)
    )
    assert worst < 2.0


def test_same_seed_gives_same_readings():
    """Two plants with one seed and the same steps read exactly the same."""
    a, b = Plant(seed=11), Plant(seed=11)
    assert [r for _, r, _ in run(a, 30.0)] == [r for _, r, _ in run(b, 30.0)]


def test_other_seed_gives_other_noise():
    """Another seed draws other noise."""
    a, b = Plant(seed=11), Plant(seed=12)
    assert [r for _, r, _ in run(a, 5.0)] != [r for _, r, _ in run(b, 5.0)]


def test_lag_is_first_order():
    """One step as long as the time constant covers 1 - 1/e of the way."""
    assert _lag(0.0, 1.0, 5.0, 5.0) == pytest.approx(1.0 - math.exp(-1.0), rel=1e-12)


def test_pressure_holds_set_point_in_steady_running():
    """With demand steady the burner holds the drum at its set point."""
    plant = Plant(seed=1)
    late = run(plant, 300.0)[-300:]
    assert all(abs(s.drum_p - PlantParams().drum_setpoint) < 0.2 * BAR for s, _, _ in late)


def test_pressure_dips_when_demand_jumps_and_recovers():
    """A demand rise pulls the drum pressure down while firing catches up, then back."""
    plant = Plant(seed=1, scenario="load-swing")
    history = run(plant, 40.0)  # demand ramps 35 % -> 90 % in the first 6 s
    pressures = [s.drum_p for s, _, _ in history]
    setpoint = PlantParams().drum_setpoint
    low = min(pressures)
    assert low < setpoint - 0.5 * BAR
    assert pressures[-1] > low + 0.3 * BAR  # recovering by the end of the high-load spell


def test_superheat_rises_with_firing():
    """More fire at the same demand gives more superheat."""
    assert Plant._superheat_target(0.6, 0.8, 0.0) > Plant._superheat_target(0.6, 0.6, 0.0)


def test_superheat_falls_when_demand_runs_ahead_of_firing():
    """Demand above firing draws more steam than the gas can heat."""
    assert Plant._superheat_target(0.8, 0.6, 0.0) < Plant._superheat_target(0.6, 0.6, 0.0)


def test_superheater_outlet_is_superheated_in_normal_running():
    """The superheater outlet runs some 50 K above Tsat at 60 % load."""
    plant = Plant(seed=2)
    _, r, b = run(plant, 60.0)[-1]
    superheat = r.sh_t + ZERO_CELSIUS - steam.tsat(r.sh_p * BAR + b)
    assert 40.0 < superheat < 65.0


def test_superheat_falling_heads_for_wet_steam():
    """With carry-over the outlet superheat falls toward zero but stays just above it."""
    plant = Plant(seed=2, scenario="superheat-falling")
    state, r, b = run(plant, 60.0)[-1]
    assert 0.5 < state.superheat < 5.0
    assert r.sh_t + ZERO_CELSIUS - steam.tsat(r.sh_p * BAR + b) < 5.0


def test_superheat_falls_below_25_k_within_ten_seconds():
    """The demo shows the fall quickly: below 25 K within 10 s of simulated time."""
    plant = Plant(seed=2, scenario="superheat-falling")
    times = [s.t for s, _, _ in run(plant, 20.0) if s.superheat < 25.0]
    assert times and times[0] < 10.0


def test_switching_back_to_normal_restores_superheat():
    """When the carry-over ends the superheat comes back."""
    plant = Plant(seed=2, scenario="superheat-falling")
    run(plant, 30.0)
    plant.set_scenario("normal")
    state, _, _ = run(plant, 60.0)[-1]
    assert state.superheat > 40.0


def test_failed_transmitter_reads_ne43_failure_current():
    """Transmitter A failing low reads 3.5 mA, inside the NE 43 failure band."""
    plant = Plant(seed=2, scenario="transmitter-failure")
    plant.step(STEP)
    # NAMUR NE 43: <= 3.6 mA signals a failed transmitter
    assert plant.readings.drum_p_ma <= NE43_FAIL_LOW == 3.6
    assert ne43(plant.readings.drum_p_ma).reason == "sensor_fault"


def test_healthy_transmitter_reads_inside_4_20_ma():
    """Transmitter A reads about 15 mA at 11 barg on a 0-16 barg range."""
    plant = Plant(seed=2)
    plant.step(STEP)
    assert plant.readings.drum_p_ma == pytest.approx(4.0 + 16.0 * 11.0 / 16.0, abs=0.1)


def test_transmitter_b_reads_absolute_normally():
    """Transmitter B reads the drum pressure in bar absolute."""
    plant = Plant(seed=2)
    state, r, _ = run(plant, 1.0)[-1]
    assert r.drum_p_b * BAR == pytest.approx(state.drum_p, abs=2000.0)


def test_transmitter_b_reads_gauge_when_mis_set():
    """In gauge-as-absolute transmitter B reads one barometer lower than the absolute."""
    plant = Plant(seed=2, scenario="gauge-as-absolute")
    state, r, baro = run(plant, 1.0)[-1]
    assert r.drum_p_b * BAR == pytest.approx(state.drum_p - baro, abs=2000.0)


def test_feedwater_is_subcooled():
    """Feedwater from the deaerator is far below Tsat at the feed pump's pressure."""
    plant = Plant(seed=2)
    _, r, b = run(plant, 10.0)[-1]
    assert r.fw_t + ZERO_CELSIUS < steam.tsat(r.fw_p * BAR + b) - 50.0


def test_condenser_is_under_vacuum_near_saturation():
    """The condenser runs near 10 kPa absolute, the hotwell about 1 K below Tsat."""
    plant = Plant(seed=2)
    _state, r, b = run(plant, 60.0)[-1]
    absolute = b - r.cond_p * 1e3
    assert 5e3 < absolute < 15e3
    assert r.cond_t + ZERO_CELSIUS - steam.tsat(absolute) == pytest.approx(-1.0, abs=0.5)


def test_barometer_reads_a_plausible_value_in_hpa():
    """The site barometer reads about 1008 hPa."""
    plant = Plant(seed=2)
    _, r, _ = run(plant, 1.0)[-1]
    assert 1000.0 < r.baro < 1016.0


def test_same_seed_and_same_scenario_switches_give_the_same_run():
    """A run is reproducible across scenario switches: same seed, same steps, same switches."""

    def one_run() -> list:
        plant = Plant(seed=21, scenario="load-swing")
        out = run(plant, 20.0)
        plant.set_scenario("transmitter-failure")
        out += run(plant, 10.0)
        plant.set_scenario("superheat-falling")
        return out + run(plant, 20.0)

    assert one_run() == one_run()


def test_drum_thermowell_agrees_with_coolprop_saturation():
    """The drum's true temperature sits on the saturation line of an independent IF97."""
    from CoolProp.CoolProp import PropsSI

    plant = Plant(seed=8)
    late = run(plant, 120.0)[-100:]
    worst = max(
        abs(s.thermowell - PropsSI("T", "P", s.drum_p, "Q", 0, "IF97::Water"))  # CoolProp IF97
        for s, _, _ in late
    )
    assert worst < 0.05
