"""Alarm-system health figures: rates, flood, chattering, stale and most frequent alarms."""

from __future__ import annotations

from edge.alarms.health import chattering, compute_health, top_alarms
from edge.alarms.state import AlarmState

NOW = 1_000_000.0


def spread(n: int, alarm: str = "a", *, start: float = NOW - 599.0, step: float = 50.0):
    return [(start + i * step, f"{alarm}{i}") for i in range(n)]


def test_eleven_alarms_in_ten_minutes_is_a_flood():
    """More than 10 alarms in 10 minutes is a flood (ISA-18.2 / EEMUA 191, from memory)."""
    h = compute_health(spread(11), {}, NOW)
    assert h.rate_10min == 11 and h.flood  # > 10 per 10 min: ISA-18.2 / EEMUA 191


def test_ten_alarms_in_ten_minutes_is_not_a_flood():
    """Exactly 10 alarms in 10 minutes is not yet a flood (ISA-18.2 / EEMUA 191)."""
    h = compute_health(spread(10), {}, NOW)
    assert h.rate_10min == 10 and not h.flood  # the threshold is "more than 10"


def test_rates_count_the_last_ten_minutes_and_the_last_hour():
    """rate_10min counts activations in (now-600, now], rate_hour in (now-3600, now]."""
    rows = [(NOW - 600.0, "a"), (NOW - 599.0, "b"), (NOW - 3599.0, "c"), (NOW - 3600.0, "d")]
    h = compute_health(rows, {}, NOW)
    assert (h.rate_10min, h.rate_hour) == (1, 3)


def test_future_rows_are_not_counted():
    """Rows stamped after ``now`` (clock step) do not count."""
    assert compute_health([(NOW + 5.0, "a")], {}, NOW).rate_10min == 0


def test_three_activations_in_sixty_seconds_is_chattering():
    """3 activations within 60 s is chattering (ISA-18.2 practice, from memory)."""
    rows = [(0.0, "pump"), (30.0, "pump"), (60.0, "pump")]
    assert chattering(rows) == ["pump"]  # 3 in 60 s: ISA-18.2 chattering figure


def test_three_activations_spread_over_more_than_sixty_seconds_is_not_chattering():
    """3 activations over 61 s are not chattering."""
    rows = [(0.0, "pump"), (30.0, "pump"), (61.0, "pump")]
    assert chattering(rows) == []


def test_two_activations_are_not_chattering():
    """2 activations, however close, are not chattering."""
    assert chattering([(0.0, "pump"), (1.0, "pump")]) == []


def test_chattering_is_per_alarm():
    """Three different alarms in 60 s are three single activations, not chattering."""
    assert chattering([(0.0, "a"), (1.0, "b"), (2.0, "c")]) == []


def test_health_reports_chattering_of_the_last_hour_only():
    """A chattering burst more than an hour ago is no longer reported."""
    old = [(NOW - 4000.0 + i, "valve") for i in range(3)]
    recent = [(NOW - 100.0 + i, "pump") for i in range(3)]
    assert compute_health(old + recent, {}, NOW).chattering == ["pump"]


def test_alarm_active_more_than_a_day_is_stale():
    """An alarm active for more than 24 h is stale (ISA-18.2, from memory)."""
    states = {
        "old": AlarmState("old", "low", active=True, active_since=NOW - 86401.0),
        "young": AlarmState("young", "low", active=True, active_since=NOW - 86399.0),
        "normal": AlarmState("normal", "low", active_since=NOW - 200_000.0),
    }
    assert compute_health([], states, NOW).stale == ["old"]  # > 24 h: ISA-18.2


def test_shelved_alarm_is_not_reported_stale():
    """A shelved standing alarm is reported as shelved, not as stale."""
    s = AlarmState("a", "low", active=True, active_since=0.0, shelved_until=NOW + 10)
    assert compute_health([], {"a": s}, NOW).stale == []


def test_top_alarms_are_the_ten_most_frequent():
    """The top list holds the 10 most frequent alarms, most first, ties by name."""
    rows = [(float(i), f"a{k:02d}") for k in range(12) for i in range(k + 1)]
    rows += [(0.0, "b11")] * 12
    top = top_alarms(rows)
    assert len(top) == 10
    assert top[:3] == [("a11", 12), ("b11", 12), ("a10", 11)]


def test_health_computes_top_over_the_last_week():
    """compute_health without a given top counts the last 7 days."""
    rows = [(NOW - 8 * 86400.0, "old")] * 5 + [(NOW - 86400.0, "new")] * 2
    assert compute_health(rows, {}, NOW).top == [("new", 2)]


def test_health_to_dict_names_the_flood_threshold():
    """The API form carries the 10-per-10-minutes flood threshold it used."""
    d = compute_health(spread(3), {}, NOW).to_dict()
    assert d["flood_threshold_10min"] == 10 and d["rate_10min"] == 3
    assert d["top"][0] == {"alarm": "a0", "count": 1}
