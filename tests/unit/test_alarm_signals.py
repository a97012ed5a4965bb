"""signals_from: the readings alarms look at, named by point quantity, tag and source."""

from __future__ import annotations

from edge.alarms.signals import signals_from
from edge.model import GOOD, BarometerReading, PointState, Reading, Sample, bad, uncertain


def sample(tag: str, value: float, quality=GOOD) -> Sample:
    return Sample(tag, value, quality, 10.0, 10.0)


def drum(quality=GOOD, hint: str | None = None) -> PointState:
    return PointState(
        name="drum",
        state="saturated",
        readings={"pressure": Reading(1.1e6, quality, "Pa"), "tsat": Reading(457.0, GOOD, "K")},
        quality=quality,
        hint=hint,
    )


def test_point_quantities_are_named_point_dot_quantity():
    """A point's readings appear as '<point>.<quantity>'."""
    s = signals_from({"drum": drum()}, {})
    assert s["drum.pressure"].value == 1.1e6 and s["drum.tsat"].value == 457.0


def test_point_quality_signal_carries_the_point_quality():
    """'<point>.quality' holds the point's quality, with its reason."""
    s = signals_from({"drum": drum(bad("comm_loss"))}, {})
    assert s["drum.quality"].quality == bad("comm_loss") and s["drum.quality"].value == 0.0


def test_point_hints_travel_with_the_signals():
    """Derive's commissioning hints are in ``hints`` by point name."""
    s = signals_from({"drum": drum(hint="gauge tag read as absolute?")}, {})
    assert s.hints == {"drum": "gauge tag read as absolute?"}


def test_tags_are_named_by_tag_in_si():
    """A tag reading appears under its name, value in SI as the source gave it."""
    s = signals_from({}, {"drum_p": sample("drum_p", 9e5)})
    assert s["drum_p"] == Reading(9e5, GOOD)


def test_bad_tag_has_no_value():
    """A bad tag sample gives a reading without a value."""
    s = signals_from({}, {"drum_p": sample("drum_p", float("nan"), bad("comm_loss"))})
    assert s["drum_p"].value is None and not s["drum_p"].usable


def test_source_is_good_while_any_tag_is_good():
    """A source with one good tag of two is good."""
    snap = {"a": sample("a", 1.0), "b": sample("b", float("nan"), bad("sensor_fault"))}
    s = signals_from({}, snap, sources={"plc": ("a", "b")})
    assert s["source:plc"].quality == GOOD


def test_source_with_every_tag_bad_is_bad_with_the_tags_reason():
    """A source whose tags are all bad is bad, keeping the reason (e.g. comm_loss)."""
    snap = {"a": sample("a", float("nan"), bad("comm_loss"))}
    s = signals_from({}, snap, sources={"plc": ("a",)})
    assert s["source:plc"].quality == bad("comm_loss")


def test_source_with_only_uncertain_tags_has_its_link_up():
    """A source whose tags are uncertain still delivers: its link is good."""
    snap = {"a": sample("a", 5.0, uncertain("out_of_range"))}
    s = signals_from({}, snap, sources={"plc": ("a",)})
    assert s["source:plc"].quality == GOOD


def test_source_with_sensor_faults_only_has_its_link_up():
    """Bad tags for a non-communication reason are the points' business, not the link's."""
    snap = {"a": sample("a", float("nan"), bad("sensor_fault"))}
    s = signals_from({}, snap, sources={"plc": ("a",)})
    assert s["source:plc"].quality == GOOD


def test_source_without_any_sample_has_no_data():
    """A source that has delivered nothing yet is bad(no_data)."""
    s = signals_from({}, {}, sources={"plc": ("a",)})
    assert s["source:plc"].quality == bad("no_data")


def test_barometer_is_a_signal():
    """The barometer in use appears as 'barometer' in Pa absolute."""
    s = signals_from({}, {}, barometer=BarometerReading(96_500.0, "altitude"))
    assert s["barometer"] == Reading(96_500.0, GOOD, "Pa")


def test_every_signal_is_listed_when_iterated():
    """Iterating gives every name: tags, point quantities, point quality, sources, barometer."""
    s = signals_from(
        {"drum": drum()},
        {"drum_p": sample("drum_p", 9e5)},
        barometer=BarometerReading(96_500.0, "altitude"),
        sources={"plc": ("drum_p",)},
    )
    assert set(s) == {
        "drum_p",
        "drum.pressure",
        "drum.tsat",
        "drum.quality",
        "source:plc",
        "barometer",
    }
    assert len(s) == 6 and dict(s)["drum.quality"] == s["drum.quality"]


def test_a_point_quantity_wins_over_a_tag_of_the_same_name():
    """'<point>.<quantity>' is the point's reading even if a tag carries that name."""
    s = signals_from({"drum": drum()}, {"drum.pressure": sample("drum.pressure", 1.0)})
    assert s["drum.pressure"].value == 1.1e6 and dict(s)["drum.pressure"].value == 1.1e6


def test_an_unknown_signal_is_missing():
    """A name that is no tag, point quantity or source is not there (get gives None)."""
    s = signals_from({"drum": drum()}, {}, sources={"plc": ("a",)})
    assert s.get("drum.enthalpy") is None and "pump.pressure" not in s
