"""Scenario table, demand profiles and the link timetable of the simulator."""

from __future__ import annotations

import itertools

import pytest

from edge.sim import scenarios


def test_every_scenario_of_the_issue_exists():
    """The seven scenarios are there, normal first."""
    assert list(scenarios.SCENARIOS) == [
        "normal",
        "load-swing",
        "superheat-falling",
        "transmitter-failure",
        "gauge-as-absolute",
        "link-drop",
        "barometer-stale",
    ]


def test_unknown_scenario_names_the_known_ones():
    """Asking for an unknown scenario lists the names that exist."""
    with pytest.raises(KeyError, match="known: normal, load-swing"):
        scenarios.get("steady")


def test_normal_demand_wanders_around_sixty_percent():
    """Normal demand stays within 0.54..0.66 of full load."""
    values = [scenarios.demand(scenarios.get("normal"), t) for t in range(0, 600)]
    assert min(values) > 0.53 and max(values) < 0.67


def test_load_swing_spans_low_and_high_fire():
    """Load-swing demand reaches both 35 % and 90 %."""
    values = [scenarios.demand(scenarios.get("load-swing"), t / 2) for t in range(0, 400)]
    assert min(values) == pytest.approx(0.35)
    assert max(values) == pytest.approx(0.90)


def test_load_swing_ramps_rather_than_steps():
    """No demand change between two half-second samples exceeds one ramp's share."""
    sc = scenarios.get("load-swing")
    values = [scenarios.demand(sc, t / 2) for t in range(0, 400)]
    step = max(abs(b - a) for a, b in itertools.pairwise(values))
    assert step <= (0.90 - 0.35) * 0.5 / scenarios.SWING_RAMP + 1e-9


@pytest.mark.parametrize(
    ("elapsed", "up"),
    [
        (0.0, True),
        (1.9, True),
        (2.0, False),
        (7.9, False),
        (8.0, True),
        (31.9, True),
        (32.0, False),
        (38.0, True),
    ],
)
def test_link_drop_timetable(elapsed, up):
    """The PLC link drops 2 s in, for 6 s, every 30 s."""
    assert scenarios.link_up(scenarios.get("link-drop"), elapsed) is up


def test_link_stays_up_outside_link_drop():
    """Only link-drop takes the link down."""
    assert all(
        scenarios.link_up(s, t)
        for s in scenarios.SCENARIOS.values()
        if s.link_drop is None
        for t in (0.0, 5.0, 50.0)
    )
