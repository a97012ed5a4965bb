"""Alarm messages: short, plain, in the unit the limit was written in."""

from __future__ import annotations

import pytest

from edge.alarms.definitions import AlarmDef, compile_alarms
from edge.alarms.engine import step
from edge.alarms.messages import default_template, duration_text, number_text, render
from edge.model import GOOD, Reading
from tests.unit.test_alarm_definitions import config


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


def test_falling_rate_shows_how_fast_it_falls():
    """A falling-rate alarm says 'falling at 4 K/min', not '-4'; 'either' keeps the sign."""
    fields = {"kind": "rate", "priority": "low", "limit": 2.0, "unit": "K"}
    fields |= {"unit_kind": "tdiff", "unit_label": "K/min", "signal": "drum_t"}
    falling = AlarmDef(name="f", direction="falling", **fields)  # type: ignore[arg-type]
    either = AlarmDef(name="e", direction="either", **fields)  # type: ignore[arg-type]
    assert render(falling, -4.0, "good") == "drum_t falling at 4 K/min (limit 2 K/min)"
    assert render(either, -4.0, "good") == "drum_t changing at -4 K/min (limit 2 K/min)"


def test_default_templates_of_rate_and_deviation():
    """Rate and deviation alarms have their own default wording."""
    rate = AlarmDef(name="r", signal="drum_t", kind="rate", priority="low", direction="falling")
    dev = AlarmDef(name="d", signal="a", kind="deviation", priority="low", other="b")
    assert default_template(rate).startswith("drum_t falling at {value}")
    assert default_template(dev).startswith("a differs from b by {value}")


# --- from the config file to the announced message ------------------------------------

PSI = 6894.757293168361  # Pa; NIST SP 811


def _announced(alarm: dict, signals: dict) -> str:
    """The message of the 'raised' event of one alarm compiled from a config."""
    defs = {k: v for k, v in compile_alarms(config([{"name": "x", **alarm}])).items() if k == "x"}
    _, events = step(defs, {}, signals, 0.0)
    [raised] = [e for e in events if e.kind == "raised"]
    return raised.message


def test_configured_psig_limit_renders_on_an_absolute_signal_in_psig():
    """A '150 psig' limit on drum.pressure (absolute inside) shows value and limit in psig."""
    message = _announced(
        {
            "signal": "drum.pressure",
            "high": "150 psig",
            "message": "Drum at {value} {unit}, trip point {limit} {unit}",
        },
        {
            "drum.pressure": Reading(152.2 * PSI + 101_325.0, GOOD),
            "barometer": Reading(101_325.0, GOOD),
        },
    )
    assert message == "Drum at 152.2 psig, trip point 150 psig"


def test_configured_fahrenheit_limit_renders_in_fahrenheit():
    """A '400 degF' limit on a degC tag shows the value in degF: 483.15 K is 410 degF."""
    message = _announced(
        {"signal": "drum_t", "high": "400 degF", "message": "{value} {unit} over {limit} {unit}"},
        {"drum_t": Reading((410.0 - 32.0) * 5.0 / 9.0 + 273.15, GOOD)},  # degF -> K, NIST SP 811
    )
    assert message == "410 degF over 400 degF"


def test_configured_vacuum_limit_renders_in_inches_of_mercury_vacuum():
    """A '25 inHg vac' low limit on a vacuum tag shows the reading in inHg vac."""
    in_hg = 3386.389  # Pa per inHg (conventional, 0 degC); NIST SP 811
    message = _announced(
        {"signal": "vac_p", "low": "25 inHg vac", "message": "{value} {unit} (low {limit})"},
        {"vac_p": Reading(24.5 * in_hg, GOOD)},
    )
    assert message == "24.5 inHg vac (low 25)"
