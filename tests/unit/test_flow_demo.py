"""The demo plant's steam main: the monitor's orifice and vortex flows from the simulated
meters agree with the plant's true flow, and the terminal view shows flows and totals."""

from __future__ import annotations

from pathlib import Path

import pytest

from edge.config import load_config
from edge.evaluation import Runtime, compile_plan
from edge.model import GOOD, Sample
from edge.sim import opcua_server
from edge.sim.modbus_server import REGISTERS
from edge.sim.plant import Plant
from edge.sim.view import FlowLine, Frame, plain_lines
from edge.sources.condition import condition

DEMO = Path(__file__).resolve().parents[2] / "config" / "demo.yaml"


def _samples(config, plant: Plant, now: float) -> list[Sample]:
    """Every tag of the demo config from the plant's readings, conditioned as the monitor
    does it (engineering unit and scale -> SI)."""
    readings = plant.readings.as_dict()
    by_address = {(r.table, r.address): r.reading for r in REGISTERS}
    modbus, gateway = config.sources
    out = []
    for tag in modbus.tags:
        reg = next(r for r in REGISTERS if (r.table, r.address) == (tag.table, tag.address))
        value = readings[by_address[(tag.table, tag.address)]]
        if tag.scale is not None:  # the register holds counts: back to raw
            raw_lo, raw_hi, lo, hi = reg.scale or tag.scale
            value = raw_lo + (value - lo) * (raw_hi - raw_lo) / (hi - lo)
        si, quality = condition(tag, value)
        out.append(Sample(tag.name, si, quality, now, now))
    nodes = {f"ns=2;s={n.node_id}": n.reading for n in opcua_server.NODES}
    for tag in gateway.tags:
        si, quality = condition(tag, readings[nodes[tag.node]])
        out.append(Sample(tag.name, si, quality, now, now))
    return out


def test_demo_flows_match_the_plant():
    """The orifice (ISO 5167-2 on the header's P and T) and the vortex meter both give the
    plant's true steam flow to 1 %."""
    config = load_config(DEMO)
    rt = Runtime(compile_plan(config))
    plant = Plant(seed=3)
    for i in range(20):
        plant.step(1.0)
        rt.ingest(_samples(config, plant, float(i)))
        rt.evaluate(float(i))
    true = plant.steam_flow()
    orifice, vortex = rt.flows["main-orifice"], rt.flows["main-vortex"]
    assert orifice.quality == GOOD and vortex.quality == GOOD
    assert orifice.mass_flow == pytest.approx(true, rel=0.01)
    assert vortex.mass_flow == pytest.approx(true, rel=0.01)
    assert orifice.energy_rate > 0
    assert rt.totals["main-orifice"].mass == pytest.approx(true * 19, rel=0.05)


def test_plain_view_shows_flows_and_totals():
    """A flow's line carries t/h, kW, the totals and the quality."""
    frame = Frame(
        elapsed=1.0,
        site="kestrel-mill-dyeworks",
        scenario="steady",
        scenario_summary="steady",
        points=[],
        alarms=[],
        barometer=None,
        sources_up=2,
        sources=2,
        keys={},
        flows=[FlowLine("main-orifice", 1.5, 3.9e6, 1234.5, 8.1e9, 2.0, "good")],
    )
    (line,) = [x for x in plain_lines(frame) if "main-orifice" in x]
    assert "flow   5.400 t/h" in line
    assert "energy   3900 kW" in line
    assert "total 1.2345 t  8.1000 GJ" in line
    assert "not measured 2 s" in line
    assert line.endswith("good")


def test_plain_view_shows_a_bad_flow_without_numbers():
    """A bad flow shows dashes and its reason."""
    frame = Frame(
        1.0,
        "s",
        "steady",
        "steady",
        [],
        [],
        None,
        2,
        2,
        {},
        flows=[FlowLine("main-vortex", None, None, 10.0, 1e6, 5.0, "bad(wet_steam)")],
    )
    (line,) = [x for x in plain_lines(frame) if "main-vortex" in x]
    assert "flow       - t/h" in line
    assert line.endswith("bad(wet_steam)")
