"""Plant model of an invented site: the boiler house of Kestrel Mill Dyeworks.

One water-tube boiler (drum at saturation) with a convective superheater, a steam header to
the dye house, a feedwater line from the deaerator (subcooled), the condenser of a small
back-pressure set under vacuum, and the site barometer. The model is a handful of
first-order lags, enough to behave like a plant in front of a monitor:

- the burner follows steam demand and corrects the drum pressure toward its set point;
- drum pressure settles toward ``set point + gain x (firing - demand)`` with a lag;
- the drum water sits at saturation: the thermowell follows IF97 Tsat(p) with a short lag;
- superheat at the superheater outlet rises with firing, falls when demand runs ahead of
  firing, and collapses toward wet steam when boiler water is carried over;
- the condenser pressure rises with load;
- the dye-house main carries the steam demand: an orifice plate (flange taps) reports its
  differential pressure, as ISO 5167-2 gives it for the true flow at header conditions, and
  a vortex meter reports the actual volume flow.

Instruments add noise and report in their own units and references (gauge, absolute,
vacuum, a 4-20 mA loop). Pure: no clock, no I/O; deterministic for a given seed and the
same sequence of steps. Scenario dynamics are compressed (minutes into seconds) so that a
demo shows them while one watches.
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass, fields, replace

from edge import steam
from edge.flow import iso5167, materials
from edge.flow.viscosity import viscosity
from edge.sim import scenarios
from edge.sim.scenarios import Scenario
from edge.steam import tsat  # IAPWS-IF97 saturation temperature, Pa -> K

__all__ = ["SITE", "Plant", "PlantParams", "PlantState", "Readings"]

SITE = "kestrel-mill-dyeworks"
ZERO_CELSIUS = 273.15
BAR = 1e5


@dataclass(frozen=True, slots=True, kw_only=True)
class PlantParams:
    """Design figures of the plant (SI: Pa absolute, K, s)."""

    drum_setpoint: float = 12.0 * BAR  # about 11 barg
    pressure_gain: float = 6.0 * BAR  # Pa per unit of firing-demand mismatch
    pressure_lag: float = 20.0
    firing_lag: float = 12.0
    firing_correction: float = 0.15  # firing per bar of pressure error
    firing_min: float = 0.15
    demand_lag: float = 3.0
    thermowell_lag: float = 2.0
    superheat_lag: float = 5.0
    carryover_lag: float = 2.5
    superheater_dp: float = 0.4 * BAR  # at full load, drum to superheater outlet
    header_dp: float = 0.3 * BAR  # at full load, superheater outlet to header
    header_loss: float = 3.0  # K lost to the pipe at full load
    feed_pump_head: float = 2.5 * BAR  # above drum pressure at full load
    deaerator_temp: float = 104.0 + ZERO_CELSIUS
    condenser_base: float = 7.0e3  # Pa absolute at no load
    condenser_rise: float = 5.0e3  # Pa more at full load
    condenser_lag: float = 25.0
    condenser_subcooling: float = 1.0  # K of the hotwell below Tsat
    barometer_mean: float = 100_800.0  # Pa (site at about 45 m)
    barometer_swing: float = 150.0  # Pa, slow weather drift
    drum_span: float = 16.0 * BAR  # transmitter range 0-16 barg over 4-20 mA
    failed_current: float = 3.5  # mA: NE 43 failure low (<= 3.6 mA)
    full_load_steam: float = 2.2  # kg/s into the dye-house main at full load (7.9 t/h)
    main_pipe: float = 0.1282  # m, 5 in schedule 40, measured at 20 degC (carbon steel)
    main_bore: float = 0.075  # m, orifice bore at 20 degC (stainless 316)


@dataclass(frozen=True, slots=True)
class PlantState:
    """The plant's true condition (SI)."""

    t: float  # simulated seconds since start
    demand: float  # fraction of full load
    firing: float  # fraction of full fire
    drum_p: float  # Pa absolute
    thermowell: float  # K, drum thermowell
    superheat: float  # K above Tsat at the superheater outlet
    carryover: float  # 0 none .. 1 full
    condenser_p: float  # Pa absolute
    feed_t: float  # K


@dataclass(frozen=True, slots=True)
class Readings:
    """What each instrument reports, in its own engineering unit and reference."""

    drum_p_ma: float  # transmitter A loop current, mA (0-16 barg over 4-20 mA)
    drum_t: float  # degC
    drum_p_b: float  # transmitter B, bar (absolute; gauge when mis-set)
    sh_p: float  # barg
    sh_t: float  # degC
    hdr_p: float  # barg
    hdr_t: float  # degC
    fw_p: float  # barg
    fw_t: float  # degC
    cond_p: float  # kPa vacuum (below the local barometer)
    cond_t: float  # degC
    baro: float  # hPa absolute
    main_dp: float  # kPa, orifice differential pressure on the dye-house main
    vortex_q: float  # m3/h, vortex meter on the dye-house main (actual volume)

    def as_dict(self) -> dict[str, float]:
        return {f.name: getattr(self, f.name) for f in fields(self)}


def _lag(value: float, target: float, dt: float, tau: float) -> float:
    """One step of a first-order lag (exact for a constant target over the step)."""
    return target + (value - target) * math.exp(-dt / tau)


class Plant:
    """The plant model. ``step(dt)`` advances it and reads every instrument once, so that
    ``readings`` is what the instruments show after that step (noise drawn from the seeded
    generator, one draw per instrument per step: the same seed and the same steps give the
    same readings)."""

    def __init__(
        self,
        *,
        seed: int = 0,
        scenario: str = scenarios.DEFAULT,
        params: PlantParams | None = None,
    ) -> None:
        self.params = params or PlantParams()
        self.scenario: Scenario = scenarios.get(scenario)
        self.scenario_start = 0.0  # simulated time the scenario began
        self._rng = random.Random(seed)
        p = self.params
        d0 = scenarios.demand(self.scenario, 0.0)
        self.state = PlantState(
            t=0.0,
            demand=d0,
            firing=d0,
            drum_p=p.drum_setpoint,
            thermowell=tsat(p.drum_setpoint),
            superheat=self._superheat_target(d0, d0, 0.0),
            carryover=0.0,
            condenser_p=p.condenser_base + p.condenser_rise * d0,
            feed_t=p.deaerator_temp,
        )
        self.readings: Readings = self._measure()

    def set_scenario(self, name: str) -> Scenario:
        """Switch scenario; its demand profile starts from its own beginning."""
        self.scenario = scenarios.get(name)
        self.scenario_start = self.state.t
        return self.scenario

    @staticmethod
    def _superheat_target(demand: float, firing: float, carryover: float) -> float:
        # more fire, more gas-side heat to the superheater; demand running ahead of firing
        # draws more steam through it than the gas can heat
        dry = 30.0 + 35.0 * firing - 25.0 * (demand - firing)
        return max(dry, 5.0) * (1.0 - 0.95 * carryover)

    def step(self, dt: float) -> PlantState:
        """Advance the plant by ``dt`` simulated seconds."""
        p, s, sc = self.params, self.state, self.scenario
        profile = scenarios.demand(sc, s.t + dt - self.scenario_start)
        demand = _lag(s.demand, profile, dt, p.demand_lag)
        error_bar = (p.drum_setpoint - s.drum_p) / BAR
        firing_target = min(max(demand + p.firing_correction * error_bar, p.firing_min), 1.0)
        firing = _lag(s.firing, firing_target, dt, p.firing_lag)
        p_target = p.drum_setpoint + p.pressure_gain * (firing - demand)
        drum_p = _lag(s.drum_p, p_target, dt, p.pressure_lag)
        carryover = _lag(s.carryover, 1.0 if sc.carryover else 0.0, dt, p.carryover_lag)
        sh_target = self._superheat_target(demand, firing, carryover)
        self.state = replace(
            s,
            t=s.t + dt,
            demand=demand,
            firing=firing,
            drum_p=drum_p,
            thermowell=_lag(s.thermowell, tsat(drum_p), dt, p.thermowell_lag),
            superheat=_lag(s.superheat, sh_target, dt, p.superheat_lag),
            carryover=carryover,
            condenser_p=_lag(
                s.condenser_p, p.condenser_base + p.condenser_rise * demand, dt, p.condenser_lag
            ),
            feed_t=_lag(s.feed_t, p.deaerator_temp + 4.0 * (demand - 0.6), dt, 30.0),
        )
        self.readings = self._measure()
        return self.state

    # -- what the instruments see -------------------------------------------------------

    def barometer(self) -> float:
        """True local barometric pressure (Pa absolute): a slow weather drift."""
        p = self.params
        return p.barometer_mean + p.barometer_swing * math.sin(2 * math.pi * self.state.t / 7200.0)

    def superheater_outlet(self) -> tuple[float, float]:
        """True (pressure Pa abs, temperature K) at the superheater outlet."""
        s, p = self.state, self.params
        sh_p = s.drum_p - p.superheater_dp * s.demand**2
        return sh_p, tsat(sh_p) + s.superheat

    def header(self) -> tuple[float, float]:
        """True (pressure Pa abs, temperature K) in the steam header."""
        s, p = self.state, self.params
        sh_p, sh_t = self.superheater_outlet()
        loss = p.header_loss * (1.2 - s.demand)  # slower steam loses more on the way
        return sh_p - p.header_dp * s.demand**2, sh_t - loss

    def steam_flow(self) -> float:
        """True mass flow (kg/s) into the dye-house main."""
        return self.params.full_load_steam * self.state.demand

    def main_meters(self) -> tuple[float, float]:
        """(orifice dp Pa, vortex actual volume flow m3/s) for the true flow at header
        conditions; wet steam is metered as if it were dry saturated vapour."""
        p, t = self.header()
        ts = tsat(p)
        if t > ts + 1e-3:
            rho = steam.properties(p, t).density
            kappa = steam.isentropic_exponent(p, t)
        else:
            t = ts
            rho = steam.saturated_vapour(p).density
            kappa = steam.saturated_vapour_isentropic_exponent(p)
        m = self.steam_flow()
        if m <= 0.0:
            return 0.0, 0.0
        pr = self.params
        pipe = materials.at_temperature(pr.main_pipe, materials.EXPANSION["carbon_steel"], t)
        bore = materials.at_temperature(pr.main_bore, materials.EXPANSION["stainless_316"], t)
        element = iso5167.Element("orifice", taps="flange")
        mu = viscosity(t, rho)
        dp = 20e3
        for _ in range(6):  # m goes with sqrt(dp): a few rescalings settle it
            got = iso5167.solve(
                element, pipe=pipe, bore=bore, dp=dp, p1=p, density=rho, viscosity=mu, kappa=kappa
            ).mass_flow
            dp *= (m / got) ** 2
        return dp, m / rho

    def _measure(self) -> Readings:
        s, p, sc = self.state, self.params, self.scenario
        n = self._rng.gauss
        baro = self.barometer()
        drum_p = s.drum_p + n(0.0, 300.0)
        if sc.drum_transmitter_failed:
            drum_ma = p.failed_current
        else:
            drum_ma = 4.0 + 16.0 * (drum_p - baro) / p.drum_span
        drum_b = s.drum_p + n(0.0, 300.0) - (baro if sc.drum_b_reads_gauge else 0.0)
        sh_p, sh_t = self.superheater_outlet()
        hdr_p, hdr_t = self.header()
        fw_p = s.drum_p + p.feed_pump_head * (1.6 - 0.6 * s.demand)
        dp, q = self.main_meters()
        return Readings(
            drum_p_ma=drum_ma,
            drum_t=s.thermowell - ZERO_CELSIUS + n(0.0, 0.1),
            drum_p_b=drum_b / BAR,
            sh_p=(sh_p + n(0.0, 300.0) - baro) / BAR,
            sh_t=sh_t - ZERO_CELSIUS + n(0.0, 0.2),
            hdr_p=(hdr_p + n(0.0, 300.0) - baro) / BAR,
            hdr_t=hdr_t - ZERO_CELSIUS + n(0.0, 0.2),
            fw_p=(fw_p + n(0.0, 500.0) - baro) / BAR,
            fw_t=s.feed_t - ZERO_CELSIUS + n(0.0, 0.1),
            cond_p=(baro - s.condenser_p + n(0.0, 30.0)) / 1e3,
            cond_t=tsat(s.condenser_p) - p.condenser_subcooling - ZERO_CELSIUS + n(0.0, 0.1),
            baro=(baro + n(0.0, 4.0)) / 100.0,
            main_dp=(dp + n(0.0, 20.0)) / 1e3,
            vortex_q=q * 3600.0 * (1.0 + n(0.0, 0.002)),
        )
