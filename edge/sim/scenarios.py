"""Scenarios of the plant simulator: what goes on at the plant, switchable while it runs.

A scenario is plain data read by the model (``plant``) and by the servers (``runner``):
the steam demand profile, a process upset, or a fault of an instrument or of the link.
Times of the demand profile are simulated seconds; the link timetable is in wall-clock
seconds, because the monitor notices a dead link in wall-clock time whatever the speed.
Pure: no clock, no I/O.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

__all__ = ["DEFAULT", "SCENARIOS", "Scenario", "demand", "get", "link_up"]


@dataclass(frozen=True, slots=True, kw_only=True)
class Scenario:
    name: str
    summary: str
    swing: bool = False  # steam demand swings between low and high fire
    carryover: bool = False  # boiler water carried over: superheat falls toward wet steam
    drum_transmitter_failed: bool = False  # drum pressure transmitter A fails low (NE 43)
    drum_b_reads_gauge: bool = False  # transmitter B reads gauge, its tag says absolute
    link_drop: tuple[float, float, float] | None = None  # first drop after, down for, period (s)
    barometer_frozen: bool = False  # the barometer stops updating


SCENARIOS: dict[str, Scenario] = {
    s.name: s
    for s in (
        Scenario(name="normal", summary="steady demand around 60 % load, every instrument healthy"),
        Scenario(
            name="load-swing",
            summary="steam demand swings between 35 % and 90 % load; pressure dips and recovers",
            swing=True,
        ),
        Scenario(
            name="superheat-falling",
            summary="boiler water carry-over: the superheater outlet falls toward wet steam",
            carryover=True,
        ),
        Scenario(
            name="transmitter-failure",
            summary="drum pressure transmitter A fails low at 3.5 mA (NAMUR NE 43 failure)",
            drum_transmitter_failed=True,
        ),
        Scenario(
            name="gauge-as-absolute",
            summary="drum pressure transmitter B reads gauge while its tag is set as absolute",
            drum_b_reads_gauge=True,
        ),
        Scenario(
            name="link-drop",
            summary="the boiler PLC's Modbus link drops for 6 s every 30 s, then returns",
            link_drop=(2.0, 6.0, 30.0),
        ),
        Scenario(
            name="barometer-stale",
            summary="the barometer stops updating; the monitor must fall back",
            barometer_frozen=True,
        ),
    )
}

DEFAULT = "normal"


def get(name: str) -> Scenario:
    """The scenario of that name; ``KeyError`` lists the known names."""
    try:
        return SCENARIOS[name]
    except KeyError:
        raise KeyError(f"unknown scenario {name!r}; known: {', '.join(SCENARIOS)}") from None


# Demand profile (fraction of the boiler's maximum continuous rating).
NORMAL_LOAD = 0.60
SWING_LOW = 0.35
SWING_HIGH = 0.90
SWING_HALF_PERIOD = 40.0  # s at each level
SWING_RAMP = 6.0  # s from one level to the other


def demand(scenario: Scenario, t: float) -> float:
    """Steam demand at simulated time ``t`` (s), as a fraction of full load."""
    if scenario.swing:
        phase = t % (2 * SWING_HALF_PERIOD)
        up = min(phase / SWING_RAMP, 1.0) if phase < SWING_HALF_PERIOD else 0.0
        if phase >= SWING_HALF_PERIOD:
            up = max(1.0 - (phase - SWING_HALF_PERIOD) / SWING_RAMP, 0.0)
        return SWING_LOW + (SWING_HIGH - SWING_LOW) * up
    # a slow, small wander: laundry-style process loads coming and going
    return (
        NORMAL_LOAD
        + 0.04 * math.sin(2 * math.pi * t / 300.0)
        + 0.02 * math.sin(2 * math.pi * t / 47.0)
    )


def link_up(scenario: Scenario, elapsed: float) -> bool:
    """Whether the PLC link is up ``elapsed`` wall-clock seconds after the scenario began."""
    if scenario.link_drop is None:
        return True
    first, down_for, period = scenario.link_drop
    if elapsed < first:
        return True
    return (elapsed - first) % period >= down_for
