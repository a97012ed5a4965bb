"""Report by exception: deadbands in the point's own figures, a maximum silence, changes of
quality and hints. Pure; time passed in."""

from __future__ import annotations

from types import SimpleNamespace

from edge.model import uncertain
from edge.publish import Deadband, Reporter
from tests.unit.publish_points import point


def test_first_pass_reports_every_point():
    """Nothing reported yet: every point is due."""
    r = Reporter()
    assert r.points({"a": point("a"), "b": point("b")}, 0.0) == ["a", "b"]


def test_change_inside_deadband_is_held():
    """A pressure move of 900 Pa under a 1 kPa deadband is not reported."""
    r = Reporter(default=Deadband(pressure=1000.0, temperature=0.5))
    r.points({"a": point(p=1_000_000.0)}, 0.0)
    assert r.points({"a": point(p=1_000_900.0)}, 1.0) == []


def test_change_of_a_deadband_is_reported():
    """A pressure move of exactly one deadband (1 kPa) is reported."""
    r = Reporter(default=Deadband(pressure=1000.0, temperature=0.5))
    r.points({"a": point(p=1_000_000.0)}, 0.0)
    assert r.points({"a": point(p=1_001_000.0)}, 1.0) == ["a"]


def test_slow_drift_is_measured_from_the_last_report():
    """Three moves of 400 Pa: the third crosses 1 kPa from the reported value."""
    r = Reporter(default=Deadband(pressure=1000.0, temperature=0.5))
    r.points({"a": point(p=1_000_000.0)}, 0.0)
    due = [r.points({"a": point(p=1_000_000.0 + 400.0 * k)}, float(k)) for k in (1, 2, 3)]
    assert due == [[], [], ["a"]]


def test_temperature_deadband_in_kelvin():
    """A 0.6 K temperature move under a 0.5 K deadband is reported."""
    r = Reporter(default=Deadband(pressure=1e9, temperature=0.5))
    r.points({"a": point(t=460.0)}, 0.0)
    assert r.points({"a": point(t=460.6)}, 1.0) == ["a"]


def test_per_point_deadband_overrides_the_default():
    """A point with its own 100 Pa deadband reports a 200 Pa move the default holds."""
    r = Reporter(default=Deadband(pressure=1000.0), per_point={"a": Deadband(pressure=100.0)})
    r.points({"a": point("a", p=1e6), "b": point("b", p=1e6)}, 0.0)
    assert r.points({"a": point("a", p=1e6 + 200), "b": point("b", p=1e6 + 200)}, 1.0) == ["a"]


def test_max_silence_reports_an_unchanged_point():
    """An unchanged point is reported again once max_silence has passed."""
    r = Reporter(max_silence=60.0)
    r.points({"a": point()}, 0.0)
    assert r.points({"a": point()}, 59.0) == []
    assert r.points({"a": point()}, 60.0) == ["a"]


def test_quality_change_is_reported_at_once():
    """Good -> uncertain with the same numbers is reported."""
    r = Reporter()
    r.points({"a": point()}, 0.0)
    assert r.points({"a": point(quality=uncertain("stale"))}, 1.0) == ["a"]


def test_value_going_bad_is_reported():
    """A pressure that is lost (bad, no value) is reported."""
    r = Reporter()
    r.points({"a": point()}, 0.0)
    assert r.points({"a": point(p=None)}, 1.0) == ["a"]


def test_new_hint_is_reported():
    """A commissioning hint appearing is reported."""
    r = Reporter()
    r.points({"a": point()}, 0.0)
    assert r.points({"a": point(hint="gauge reading configured as absolute?")}, 1.0) == ["a"]


def test_source_reported_when_it_goes_down():
    """A source going down is due; staying down is not until max_silence."""
    r = Reporter(max_silence=60.0)
    r.sources({"plc": SimpleNamespace(up=True)}, 0.0)
    assert r.sources({"plc": SimpleNamespace(up=False)}, 1.0) == ["plc"]
    assert r.sources({"plc": SimpleNamespace(up=False)}, 2.0) == []


def test_reset_reports_everything_again():
    """After reset every point is due again."""
    r = Reporter()
    r.points({"a": point()}, 0.0)
    r.reset()
    assert r.points({"a": point()}, 1.0) == ["a"]
