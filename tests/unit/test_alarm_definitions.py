"""compile_alarms: configured alarms into SI definitions, built-in alarms, and errors with
their path in the file."""

from __future__ import annotations

from typing import Any

import pytest

from edge.alarms.definitions import Suppress, compile_alarms
from edge.config import Config
from edge.errors import ConfigError


def config(alarms: list[dict[str, Any]] | None = None, **points: Any) -> Config:
    drum: dict[str, Any] = {
        "name": "drum",
        "pressure": "drum_p",
        "temperature": "drum_t",
        "state": "saturated",
    }
    drum.update(points)
    return Config.model_validate(
        {
            "version": 1,
            "site": "millbrook-dairy",
            "barometer": {"fixed": "101.325 kPa"},
            "sources": [
                {
                    "name": "boiler-plc",
                    "protocol": "modbus-tcp",
                    "host": "127.0.0.1",
                    "interval": "2 s",
                    "tags": [
                        {
                            "name": "drum_p",
                            "table": "holding",
                            "address": 0,
                            "unit": "bar",
                            "reference": "gauge",
                        },
                        {"name": "drum_t", "table": "input", "address": 10, "unit": "degC"},
                        {
                            "name": "feed_t",
                            "table": "input",
                            "address": 11,
                            "unit": "degC",
                            "stale_after": "30 s",
                        },
                        {
                            "name": "vac_p",
                            "table": "input",
                            "address": 12,
                            "unit": "inHg",
                            "reference": "vacuum",
                        },
                        {"name": "hotwell_level", "table": "input", "address": 13, "unit": "m"},
                    ],
                }
            ],
            "points": [drum],
            "alarms": alarms or [],
        }
    )


def one(alarm: dict[str, Any]):
    alarm = {"name": "x", **alarm}
    return compile_alarms(config([alarm]))["x"]


def problems(alarms: list[dict[str, Any]], **points: Any) -> list[tuple[str, str]]:
    with pytest.raises(ConfigError) as info:
        compile_alarms(config(alarms, **points))
    return [(p.path, p.message) for p in info.value.problems]


def test_gauge_limit_on_point_pressure_keeps_its_reference():
    """'10 barg' on drum.pressure is 1e6 Pa gauge; the signal is absolute."""
    d = one({"signal": "drum.pressure", "high": "10 barg"})
    assert (d.kind, d.limit, d.reference, d.signal_reference) == ("high", 1e6, "gauge", "absolute")
    assert (d.unit, d.unit_label, d.quantity) == ("bar", "barg", "pressure")


def test_pressure_limit_in_psia():
    """'150 psia' is 1034213.6 Pa absolute (1 psi = 6894.757 Pa, NIST SP 811)."""
    d = one({"signal": "drum.pressure", "high_high": "150 psia"})
    assert d.limit == pytest.approx(150 * 6894.757293168361)  # NIST SP 811: 1 psi
    assert (d.reference, d.unit_label) == ("absolute", "psia")


def test_pressure_limit_without_reference_is_refused():
    """'10 bar' does not say gauge or absolute: an error naming the field."""
    [(path, message)] = problems([{"name": "x", "signal": "drum.pressure", "high": "10 bar"}])
    assert path == "alarms[0].high" and "gauge or absolute" in message and "10 barg" in message


def test_vacuum_tag_limit_keeps_vacuum_reference():
    """A limit on a vacuum tag may be written as vacuum: '25 inHg vac'."""
    d = one({"signal": "vac_p", "low": "25 inHg vac"})
    assert (d.reference, d.signal_reference, d.unit_label) == ("vacuum", "vacuum", "inHg vac")
    assert d.limit == pytest.approx(25 * 3386.389)  # conventional inHg at 0 degC, from memory


def test_temperature_tag_limit_in_kelvin():
    """185 degC on a temperature tag is 458.15 K and shows in degC."""
    d = one({"signal": "feed_t", "high": "185 degC", "deadband": "1.8 delta degF"})
    assert d.limit == pytest.approx(458.15)
    assert d.deadband == pytest.approx(1.0)  # 1.8 degF difference = 1 K
    assert (d.unit, d.unit_kind) == ("degC", "temperature")


def test_superheat_limit_is_a_temperature_difference():
    """A superheat limit is a difference: '45 delta degF' is 25 K."""
    d = one({"signal": "drum.superheat", "low": "45 delta degF"})
    assert d.limit == pytest.approx(25.0)
    assert d.unit_kind == "tdiff"


def test_pressure_deadband_is_a_difference():
    """A pressure deadband '0.2 bar' is 20 kPa with no reference needed."""
    d = one({"signal": "drum.pressure", "high": "10 barg", "deadband": "0.2 bar"})
    assert d.deadband == pytest.approx(20_000.0)


def test_pressure_deadband_with_a_reference_is_refused():
    """A pressure deadband '0.2 barg' is refused: a difference has no reference."""
    [(path, message)] = problems(
        [{"name": "x", "signal": "drum.pressure", "high": "10 barg", "deadband": "0.2 barg"}]
    )
    assert path == "alarms[0].deadband"
    assert "a pressure difference has no reference" in message


def test_length_tag_deadband_is_a_length():
    """A deadband on a level tag in metres is a length: '0.05 m' is 0.05 m."""
    d = one({"signal": "hotwell_level", "high": "1.2 m", "deadband": "0.05 m"})
    assert (d.limit, d.deadband, d.unit_kind, d.unit_label) == (1.2, 0.05, "length", "m")


def test_enthalpy_limit_in_btu_per_lb():
    """An enthalpy limit '1200 Btu/lb' is 2.7912e6 J/kg and shows in Btu/lb."""
    d = one({"signal": "drum.enthalpy", "high": "1200 Btu/lb"})
    assert d.limit == pytest.approx(1200 * 2326.0)  # from memory: 1 Btu(IT)/lb = 2.326 kJ/kg
    assert (d.unit, d.unit_kind, d.unit_label) == ("Btu/lb", "enthalpy", "Btu/lb")


def test_enthalpy_limit_in_kj_per_kg():
    """An enthalpy limit '2800 kJ/kg' is 2.8e6 J/kg."""
    d = one({"signal": "drum.enthalpy", "low": "2800 kJ/kg"})
    assert d.limit == pytest.approx(2.8e6) and d.unit_label == "kJ/kg"


def test_rate_limit_per_minute():
    """A rate limit '5 K' with direction rising is 5 K per minute."""
    d = one({"signal": "drum_t", "rate": {"limit": "5 K", "direction": "rising"}})
    assert (d.kind, d.limit, d.direction, d.unit_label) == ("rate", 5.0, "rising", "K/min")


def test_deviation_between_two_temperatures():
    """A deviation alarm between two temperatures takes a difference limit."""
    d = one({"signal": "drum_t", "deviation": {"signal": "feed_t", "limit": "3 K"}})
    assert (d.kind, d.other, d.limit) == ("deviation", "feed_t", 3.0)


def test_deviation_between_unlike_signals_is_refused():
    """A pressure cannot deviate from a temperature."""
    [(path, _)] = problems(
        [
            {
                "name": "x",
                "signal": "drum.pressure",
                "deviation": {"signal": "feed_t", "limit": "1 K"},
            }
        ]
    )
    assert path == "alarms[0].deviation.signal"


def test_suppress_when_is_parsed_into_si():
    """'drum.pressure < 2 barg' suppresses below 2e5 Pa gauge."""
    d = one({"signal": "drum.superheat", "low": "5 K", "suppress_when": "drum.pressure < 2 barg"})
    assert d.suppress == Suppress("drum.pressure", "<", 2e5, "pressure", "gauge", "absolute")


def test_bad_suppress_when_is_refused():
    """A suppress_when that is not '<signal> < <quantity>' names its path."""
    [(path, _)] = problems(
        [{"name": "x", "signal": "drum_t", "high": "200 degC", "suppress_when": "when idle"}]
    )
    assert path == "alarms[0].suppress_when"


def test_unknown_signal_is_refused():
    """An alarm on a signal that is neither a tag nor a point quantity names its path."""
    [(path, message)] = problems([{"name": "x", "signal": "drum.colour", "high": "1 K"}])
    assert path == "alarms[0].signal" and "colour" in message


def test_two_conditions_are_refused():
    """An alarm has exactly one condition."""
    [(path, message)] = problems(
        [{"name": "x", "signal": "drum_t", "high": "200 degC", "low": "100 degC"}]
    )
    assert path == "alarms[0]" and "high, low" in message


def test_every_problem_is_reported():
    """Two broken alarms give two problems in one ConfigError."""
    found = problems(
        [
            {"name": "x", "signal": "nowhere", "high": "1 K"},
            {"name": "y", "signal": "drum_t", "high": "200 bar"},
        ]
    )
    assert [p for p, _ in found] == ["alarms[0].signal", "alarms[1].high"]


def test_point_quality_and_source_comm_alarms_are_built_in():
    """Every point gets a quality alarm and every source a comm alarm without configuration."""
    defs = compile_alarms(config())
    q = defs["drum-quality"]
    assert (q.kind, q.signal, q.on_delay, q.builtin) == ("quality", "drum.quality", 10.0, "quality")
    src = defs["boiler-plc-comm"]
    assert (src.signal, src.on_delay, src.builtin) == ("source:boiler-plc", 10.0, "comm")
    assert q.causes == ("boiler-plc-comm",)


def test_tag_used_directly_gets_a_quality_alarm():
    """A tag used as an alarm signal outside any point gets '<tag>-quality'."""
    defs = compile_alarms(config([{"name": "x", "signal": "feed_t", "high": "120 degC"}]))
    assert defs["feed_t-quality"].on_delay == 30.0  # its stale_after


def test_tag_of_a_point_gets_no_extra_quality_alarm():
    """A tag that feeds a point is covered by the point's quality alarm."""
    defs = compile_alarms(config([{"name": "x", "signal": "drum_t", "high": "200 degC"}]))
    assert "drum_t-quality" not in defs


def test_saturation_alarm_follows_the_point():
    """deviation_alarm on a saturated point adds '<point>-saturation' at its tolerance."""
    defs = compile_alarms(
        config(tolerance="3 K", deviation_alarm={"priority": "high", "on_delay": "2 min"})
    )
    d = defs["drum-saturation"]
    assert (d.signal, d.kind, d.limit, d.priority, d.on_delay) == (
        "drum.deviation",
        "high",
        3.0,
        "high",
        120.0,
    )


def test_saturation_alarm_on_a_superheated_point_is_refused():
    """Only saturated points can have a saturation deviation alarm."""
    [(path, _)] = problems([], state="superheated", deviation_alarm={})
    assert path == "points[0].deviation_alarm"


def test_alarm_name_taken_by_a_built_in_is_refused():
    """A configured alarm may not reuse a built-in alarm's name."""
    [(path, message)] = problems([{"name": "drum-quality", "signal": "drum_t", "high": "1 K"}])
    assert path == "alarms[0]" and "already used" in message
