"""Alarm messages: short, plain, in the unit the limit was written in."""

from __future__ import annotations

import pytest

from edge.alarms.definitions import AlarmDef
from edge.alarms.messages import default_template, duration_text, number_text, render


def pressure(**kw: object) -> AlarmDef:
    fields: dict[str, object] = {
        "name": "drum-p-high",
        "signal": "drum.pressure",
        "kind": "high",
        "priority": "high",
        "limit": 150 * 6894.757293168361,
        "quantity": "pressure",
        "unit": "psi",
        "unit_kind": "pressure",
        "unit_label": "psig",
        "reference": "gauge",
    }
    fields.update(kw)
    return AlarmDef(**fields)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("x", "text"),
    [
        (10.05, "10.05"),
        (185.34, "185.3"),
        (1025.4, "1025"),
        (0.354, "0.354"),
        (10.0, "10"),
        (0.0, "0"),
        (-3.25, "-3.25"),
        (2.5, "2.5"),
    ],
)
def test_number_text(x, text):
    """Numbers show with 4 significant figures and no trailing zeros."""
    assert number_text(x) == text


@pytest.mark.parametrize(("s", "text"), [(45.0, "45 s"), (1800.0, "30 min"), (7200.0, "2 h")])
def test_duration_text(s, text):
    """Durations show in s, min or h."""
    assert duration_text(s) == text


def test_default_message_in_the_limits_unit():
    """Without a template the message names signal, value and limit in psig."""
    d = pressure()
    assert render(d, 152.2 * 6894.757293168361, "good") == (
        "drum.pressure high: 152.2 psig (limit 150 psig)"
    )


def test_template_placeholders_render_in_display_units():
    """{value}, {limit} and {unit} render in the unit the limit was written in."""
    d = pressure(message="Drum at {value} {unit}, trip point {limit} {unit}")
    assert render(d, 151 * 6894.757293168361, "good") == "Drum at 151 psig, trip point 150 psig"


def test_template_format_spec_is_honoured():
    """A format spec such as {value:.1f} applies to the display value."""
    d = pressure(message="{value:.1f}")
    assert render(d, 151 * 6894.757293168361, "good") == "151.0"


def test_unknown_placeholder_is_left_as_written():
    """An unknown placeholder stays in the text instead of failing."""
    assert render(pressure(message="at {where}"), 0.0, "good") == "at {where}"


def test_broken_template_is_returned_as_written():
    """A template that cannot be formatted comes back unchanged: a message never breaks."""
    assert render(pressure(message="100% {value"), 0.0, "good") == "100% {value"


def test_missing_value_renders_as_not_available():
    """Without a value the message says n/a."""
    assert render(pressure(message="{value}"), None, "bad(comm_loss)") == "n/a"


def test_temperature_limit_renders_in_celsius():
    """A temperature written in degC renders in degC: 458.15 K is 185 degC."""
    d = AlarmDef(
        name="t",
        signal="drum_t",
        kind="high",
        priority="low",
        limit=458.15,
        unit="degC",
        unit_kind="temperature",
        unit_label="degC",
    )
    assert render(d, 460.0, "good") == "drum_t high: 186.9 degC (limit 185 degC)"


def test_quality_message_says_alarms_are_held_only_while_not_good():
    """The built-in quality text adds 'its alarms are held' only when data is not good."""
    d = AlarmDef(
        name="drum-quality",
        signal="drum.quality",
        kind="quality",
        priority="medium",
        message="Point drum data quality: {quality}{held}",
    )
    assert render(d, None, "bad(comm_loss)") == (
        "Point drum data quality: bad(comm_loss); its alarms are held"
    )
    assert render(d, None, "good") == "Point drum data quality: good"


def test_default_templates_of_rate_and_deviation():
    """Rate and deviation alarms have their own default wording."""
    rate = AlarmDef(name="r", signal="drum_t", kind="rate", priority="low", direction="falling")
    dev = AlarmDef(name="d", signal="a", kind="deviation", priority="low", other="b")
    assert default_template(rate).startswith("drum_t falling at {value}")
    assert default_template(dev).startswith("a differs from b by {value}")
