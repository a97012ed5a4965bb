"""The engine rule for the barometer fallback: an input uncertain only because the
barometer fallback stands in for the live barometer tag does not hold a process alarm (the
fallback's few kPa are small against process limits); any other not-good input still holds
it. Through one evaluation pass (TagStore -> barometer -> derive -> signals -> engine), at
explicit times."""

from __future__ import annotations

from edge.barometer import standard_atmosphere
from edge.config import Config
from edge.evaluation import Runtime, compile_plan
from edge.model import GOOD, Quality, Sample, uncertain

BAR = 1e5
FALLBACK = standard_atmosphere(100.0)  # the configured altitude stands in (Pa absolute)


def config() -> Config:
    return Config.model_validate(
        {
            "version": 1,
            "site": "larkspur-brewery",
            "barometer": {"altitude": "100 m", "tag": "baro", "max_age": "5 s"},
            "sources": [
                {
                    "name": "plc",
                    "protocol": "modbus-tcp",
                    "host": "127.0.0.1",
                    "interval": "1 s",
                    "tags": [
                        {"name": "drum_p", "table": "holding", "address": 0, "unit": "bar",
                         "reference": "gauge"},
                        {"name": "drum_t", "table": "input", "address": 1, "unit": "degC"},
                        {"name": "baro", "table": "input", "address": 2, "unit": "hPa",
                         "reference": "absolute"},
                    ],
                },
            ],
            "points": [
                {"name": "drum", "pressure": "drum_p", "temperature": "drum_t",
                 "state": "saturated", "tolerance": "3 K", "quality_delay": "1 s"},
            ],
            "alarms": [
                {"name": "drum-pressure-high", "signal": "drum.pressure", "high": "13.5 bara",
                 "deadband": "0.2 bar", "on_delay": "2 s", "priority": "high"},
                {"name": "drum-pressure-gauge-high", "signal": "drum.pressure",
                 "high": "12.5 barg", "on_delay": "2 s", "priority": "high"},
                {"name": "drum-superheat-high", "signal": "drum.superheat", "high": "5 K",
                 "on_delay": "2 s", "priority": "medium"},
            ],
        }
    )  # fmt: skip


# IAPWS-IF97 saturation at 11 bar(a): 184.06 degC (R7-97 eq. 31, from memory)
NORMAL = {"drum_p": 10.0 * BAR, "drum_t": 273.15 + 184.0, "baro": 100_000.0}


class Plant:
    """Samples every 0.5 s; a tag in ``frozen`` stops updating (it goes stale)."""

    def __init__(self) -> None:
        self.rt = Runtime(compile_plan(config()))
        self.values = dict(NORMAL)
        self.qualities: dict[str, Quality] = {}
        self.frozen: set[str] = set()
        self.events: list = []

    def run(self, start: float, stop: float) -> None:
        t = start
        while t <= stop:
            self.rt.ingest(
                [
                    Sample(tag, v, self.qualities.get(tag, GOOD), t, t)
                    for tag, v in self.values.items()
                    if tag not in self.frozen
                ]
            )
            self.events += self.rt.evaluate(t)
            t += 0.5

    def raised(self, alarm: str) -> list[float]:
        return [e.time for e in self.events if e.alarm == alarm and e.kind == "raised"]


def on_fallback() -> Plant:
    """Normal running, then the barometer tag freezes at 5 s: by 15 s the fallback is in use."""
    p = Plant()
    p.run(0.0, 5.0)
    p.frozen.add("baro")
    p.run(5.5, 15.0)
    drum = p.rt.light["drum"]
    assert drum.quality.name == "uncertain" and drum.quality.reason.startswith("barometer_")
    return p


def test_fallback_only_uncertainty_does_not_hold_a_process_alarm():
    """Drum pressure over 13.5 bara during a barometer outage raises after its 2 s on-delay,
    on the fallback value, and the event says the input was uncertain."""
    p = on_fallback()
    p.values["drum_p"] = 13.0 * BAR  # gauge: 13 barg + ~1 bar fallback ~ 14 bara
    p.run(15.5, 20.0)
    assert p.raised("drum-pressure-high") == [17.5]
    event = next(e for e in p.events if e.alarm == "drum-pressure-high")
    assert event.value == 13.0 * BAR + FALLBACK
    assert event.quality.startswith("uncertain(barometer_")
    assert p.rt.states["drum-quality"].state == "normal"


def test_fallback_only_uncertainty_lets_a_process_alarm_return():
    """An active drum pressure alarm returns to normal on the fallback value too (it is
    not held active through the outage)."""
    p = Plant()
    p.values["drum_p"] = 13.0 * BAR
    p.run(0.0, 5.0)
    assert p.rt.states["drum-pressure-high"].active
    p.frozen.add("baro")
    p.run(5.5, 15.0)
    p.values["drum_p"] = 10.0 * BAR
    p.run(15.5, 16.0)
    cleared = [e.time for e in p.events if e.alarm == "drum-pressure-high" and e.kind == "cleared"]
    assert cleared == [15.5]


def test_fallback_barometer_converts_a_gauge_limit_on_an_absolute_signal():
    """A 12.5 barg limit on the absolute drum pressure is compared through the fallback
    barometer: 13 barg raises after the on-delay."""
    p = on_fallback()
    p.values["drum_p"] = 13.0 * BAR
    p.run(15.5, 20.0)
    assert p.raised("drum-pressure-gauge-high") == [17.5]


def test_other_uncertainty_beside_the_fallback_still_holds_a_process_alarm():
    """An uncertain drum thermometer during a barometer outage holds the superheat alarm,
    even though the superheat reading's reason names the barometer."""
    p = on_fallback()
    p.values["drum_t"] = 273.15 + 200.0  # ~16 K above Tsat
    p.qualities["drum_t"] = uncertain("out_of_range")
    p.run(15.5, 25.0)
    assert p.rt.light["drum"].readings["superheat"].quality.reason.startswith("barometer_")
    assert p.raised("drum-superheat-high") == []
    assert p.rt.states["drum-superheat-high"].state == "normal"


def test_other_uncertainty_of_the_pressure_still_holds_a_process_alarm():
    """An uncertain drum transmitter (over its range) during a barometer outage holds the
    pressure alarm: only the fallback's uncertainty is let through."""
    p = on_fallback()
    p.values["drum_p"] = 13.0 * BAR
    p.qualities["drum_p"] = uncertain("out_of_range")
    p.run(15.5, 25.0)
    assert p.raised("drum-pressure-high") == []
    assert p.rt.states["drum-pressure-high"].quality == "uncertain(out_of_range)"
