"""Cause alarms and designed suppression through one evaluation pass (TagStore -> barometer
-> derive -> signals -> engine): a link down raises ``<source>-comm`` and suppresses the
quality alarms it explains; a stale barometer raises ``barometer-fallback`` and no point
quality alarm (ISA-18.2 state-based suppression, from memory)."""

from __future__ import annotations

import math

from edge.config import Config
from edge.evaluation import Runtime, compile_plan
from edge.model import GOOD, Sample, bad

BAR = 1e5


def config(**philosophy: object) -> Config:
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
                    "quality_delay": "3 s",
                    "tags": [
                        {"name": "drum_p", "table": "holding", "address": 0, "unit": "bar",
                         "reference": "gauge"},
                        {"name": "drum_t", "table": "input", "address": 1, "unit": "degC"},
                    ],
                },
                {
                    "name": "gateway",
                    "protocol": "opcua",
                    "endpoint": "opc.tcp://127.0.0.1:4840",
                    "interval": "1 s",
                    "quality_delay": "3 s",
                    "tags": [
                        {"name": "baro", "node": "ns=2;s=B", "unit": "hPa",
                         "reference": "absolute"},
                        {"name": "hdr_p", "node": "ns=2;s=P", "unit": "bar",
                         "reference": "absolute"},
                        {"name": "hdr_t", "node": "ns=2;s=T", "unit": "degC"},
                    ],
                },
            ],
            "points": [
                {"name": "drum", "pressure": "drum_p", "temperature": "drum_t",
                 "state": "saturated", "tolerance": "3 K", "quality_delay": "1 s"},
                {"name": "header", "pressure": "hdr_p", "temperature": "hdr_t",
                 "state": "superheated", "quality_delay": "1 s"},
            ],
            "alarm_philosophy": philosophy,
        }
    )  # fmt: skip


# IAPWS-IF97 saturation at 11 bar(a): 184.06 degC (R7-97 eq. 31, from memory)
GOOD_VALUES = {
    "drum_p": 10.0 * BAR,  # gauge, + ~1 bar barometer
    "drum_t": 273.15 + 184.0,
    "baro": 100_000.0,
    "hdr_p": 10.0 * BAR,
    "hdr_t": 273.15 + 220.0,
}


class Plant:
    def __init__(self) -> None:
        self.rt = Runtime(compile_plan(config()))
        self.raised: list[str] = []
        self.events: list = []
        self.down: set[str] = set()
        self.frozen: set[str] = set()

    def tick(self, t: float) -> list:
        samples = []
        for tag, v in GOOD_VALUES.items():
            if tag in self.frozen:
                continue
            src = "gateway" if tag in ("baro", "hdr_p", "hdr_t") else "plc"
            if src in self.down:
                samples.append(Sample(tag, math.nan, bad("comm_loss"), t, t))
            else:
                samples.append(Sample(tag, v, GOOD, t, t))
        self.rt.ingest(samples)
        events = self.rt.evaluate(t)
        self.events += events
        self.raised += [e.alarm for e in events if e.kind == "raised"]
        return events

    def run(self, start: float, stop: float) -> None:
        t = start
        while t <= stop:
            self.tick(t)
            t += 0.5

    def state(self, name: str) -> str:
        return self.rt.states[name].state


def test_built_in_cause_alarms_exist_for_each_source_and_the_barometer():
    """Each source gets '<source>-comm' with its quality_delay; a live barometer tag gets
    'barometer-fallback', explained in turn by its source's link."""
    defs = compile_plan(config()).alarms
    assert defs["plc-comm"].on_delay == 3.0 and defs["plc-comm"].builtin == "comm"
    assert defs["barometer-fallback"].causes == ("gateway-comm",)
    assert defs["drum-quality"].causes == ("plc-comm",)


def test_link_down_raises_the_comm_alarm_and_suppresses_the_points_quality_alarms():
    """The PLC link down for 10 s: one alarm (plc-comm); drum-quality is suppressed by
    design, journalled with its cause, never raised."""
    p = Plant()
    p.run(0.0, 5.0)
    p.down.add("plc")
    p.run(5.5, 15.0)
    assert p.raised == ["plc-comm"]
    assert p.state("drum-quality") == "suppressed"
    assert p.rt.states["drum-quality"].suppressed_by == "plc-comm"
    sup = [e for e in p.events if e.alarm == "drum-quality" and e.kind == "suppressed"]
    assert sup and sup[0].comment == "explained by plc-comm"
    assert p.state("header-quality") == "normal"


def test_link_back_clears_the_cause_and_returns_the_suppressed_alarms():
    """When the link returns, plc-comm clears and drum-quality returns to normal without
    being raised."""
    p = Plant()
    p.run(0.0, 5.0)
    p.down.add("plc")
    p.run(5.5, 15.0)
    p.down.clear()
    p.run(15.5, 25.0)
    assert p.raised == ["plc-comm"]
    kinds = [(e.alarm, e.kind) for e in p.events if e.kind in ("cleared", "unsuppressed")]
    assert ("plc-comm", "cleared") in kinds and ("drum-quality", "unsuppressed") in kinds
    assert p.state("drum-quality") == "normal"


def test_a_link_blip_shorter_than_the_delay_raises_nothing():
    """A 2 s drop (under the 3 s quality_delay) raises neither the cause nor the points."""
    p = Plant()
    p.run(0.0, 5.0)
    p.down.add("plc")
    p.run(5.5, 7.0)
    p.down.clear()
    p.run(7.5, 20.0)
    assert p.raised == []


def test_stale_barometer_raises_one_alarm_and_no_point_quality_alarm():
    """The barometer freezes: barometer-fallback is raised; the gauge drum point is
    uncertain (fallback in use) but raises no quality alarm."""
    p = Plant()
    p.run(0.0, 5.0)
    p.frozen.add("baro")
    p.run(5.5, 30.0)
    assert p.raised == ["barometer-fallback"]
    drum = p.rt.light["drum"]
    assert drum.quality.name == "uncertain" and drum.quality.reason.startswith("barometer_")
    assert p.state("drum-quality") == "normal"
    message = p.rt.states["barometer-fallback"].in_message
    assert message.startswith("Barometer baro not used (barometer_") and "kPa" in message


def test_fresh_barometer_clears_the_fallback_alarm():
    """The barometer updates again: barometer-fallback returns (cleared)."""
    p = Plant()
    p.run(0.0, 5.0)
    p.frozen.add("baro")
    p.run(5.5, 15.0)
    p.frozen.clear()
    p.run(15.5, 17.0)
    assert [e.kind for e in p.events if e.alarm == "barometer-fallback"] == ["raised", "cleared"]


def test_gateway_down_explains_the_barometer_too():
    """The gateway (which carries the barometer) drops: one alarm, gateway-comm; the
    barometer alarm and the header quality alarm are suppressed by it."""
    p = Plant()
    p.run(0.0, 5.0)
    p.down.add("gateway")
    p.run(5.5, 20.0)
    assert p.raised == ["gateway-comm"]
    assert p.state("barometer-fallback") == "suppressed"
    assert p.state("header-quality") == "suppressed"


def test_a_real_fault_on_a_point_still_raises_while_the_barometer_falls_back():
    """Barometer fallback plus a failed drum transmitter: the drum quality alarm speaks."""
    p = Plant()
    p.run(0.0, 5.0)
    p.frozen.add("baro")
    p.run(5.5, 15.0)
    good = GOOD_VALUES["drum_p"]
    GOOD_VALUES["drum_p"] = math.nan
    try:
        p.run(15.5, 20.0)
    finally:
        GOOD_VALUES["drum_p"] = good
    assert "drum-quality" in p.raised


def test_health_counts_the_cause_and_lists_the_suppressed():
    """Alarm-system health: one standing cause, the suppressed consequences listed."""
    from edge.alarms.health import compute_health

    p = Plant()
    p.run(0.0, 5.0)
    p.down.add("plc")
    p.run(5.5, 15.0)
    activations = [(e.time, e.alarm) for e in p.events if e.kind == "raised"]
    h = compute_health(activations, p.rt.states, 15.0).to_dict()
    assert h["rate_10min"] == 1 and h["causes"] == ["plc-comm"]
    assert h["suppressed"] == ["drum-quality"]
