"""The demo's preparation (per-run config) and its plain-text view."""

from __future__ import annotations

import argparse
import socket

import pytest
import yaml

from edge.commands import demo
from edge.config import load_config
from edge.errors import ConfigError
from edge.model import GOOD, BarometerReading, PointState, Reading, bad
from edge.sim.view import AlarmLine, Frame, plain_lines, render


def args(**over) -> argparse.Namespace:
    parser = argparse.ArgumentParser()
    demo.add_arguments(parser)
    ns = parser.parse_args([])
    for k, v in over.items():
        setattr(ns, k, v)
    return ns


def test_prepare_writes_a_valid_per_run_config(tmp_path):
    """The per-run copy loads, listens where asked and keeps state in the run folder."""
    run = demo.prepare(args(listen="127.0.0.1:0"), tmp_path)
    cfg = load_config(str(run.config_path))
    assert cfg.http.listen == "127.0.0.1:0"
    assert cfg.storage.path == str(tmp_path / "state.sqlite")
    assert cfg.http.token_env == run.token_env == "STEAMEDGE_DEMO_TOKEN"
    assert len(run.token) >= 32


def test_demo_listens_on_the_default_address_unless_told():
    """Without --listen the demo serves metrics and the API on 127.0.0.1:9847."""
    assert args().listen == "127.0.0.1:9847"


def test_a_taken_listen_port_is_refused_before_anything_starts(capsys):
    """--listen on a port in use: exit 2 at once with one line saying so."""
    from edge.cli import main

    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        assert main(["demo", "--listen", f"127.0.0.1:{port}", "--duration", "1"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and f"--listen 127.0.0.1:{port}: cannot listen there" in err[0]


def test_a_malformed_listen_address_is_refused():
    """--listen without a port is a readable ConfigError."""
    with pytest.raises(ConfigError, match="--listen: expected 'host:port'"):
        demo.check_listen("127.0.0.1")


def test_prepare_takes_the_given_state_file(tmp_path):
    """--state puts the state file where the user says."""
    run = demo.prepare(args(state=str(tmp_path / "keep.sqlite")), tmp_path)
    assert run.state_path == tmp_path / "keep.sqlite"


def test_prepare_moves_a_taken_simulator_port(tmp_path):
    """A taken Modbus port is replaced by a free one, in the config and the simulator alike."""
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        port = busy.getsockname()[1]
        src = tmp_path / "in.yaml"
        data = yaml.safe_load(demo.packaged_config().read_text())
        data["sources"][0]["port"] = port
        src.write_text(yaml.safe_dump(data))
        run = demo.prepare(args(config=str(src)), tmp_path)
    cfg = load_config(str(run.config_path))
    assert run.sim.modbus_port != port
    assert cfg.sources[0].port == run.sim.modbus_port
    assert any(f"Modbus port {port} is taken" in n for n in run.notes)


def test_prepare_passes_scenario_speed_and_seed_to_the_simulator(tmp_path):
    """The simulator starts in the scenario, at the speed and with the seed asked for."""
    run = demo.prepare(args(scenario="link-drop", speed=4.0, seed=9), tmp_path)
    assert (run.sim.scenario, run.sim.speed, run.sim.seed) == ("link-drop", 4.0, 9)


def _drum(hint: str | None = None) -> PointState:
    return PointState(
        name="drum",
        state="saturated",
        readings={
            "pressure": Reading(12.0e5, GOOD, "Pa"),
            "temperature": Reading(461.11, GOOD, "K"),
            "tsat": Reading(461.04, GOOD, "K"),
            "superheat": Reading(0.07, GOOD, "K"),
        },
        quality=GOOD,
        hint=hint,
    )


def _frame(points, alarms=()) -> Frame:
    return Frame(
        elapsed=3.0,
        site="kestrel-mill-dyeworks",
        scenario="normal",
        scenario_summary="steady",
        points=points,
        alarms=list(alarms),
        barometer=BarometerReading(100_800.0, "tag"),
        sources_up=2,
        sources=2,
        keys={},
    )


def test_plain_view_shows_pressure_tsat_superheat_and_quality():
    """A point's line carries bar(a), T, Tsat, superheat and quality."""
    lines = plain_lines(_frame([_drum()]))
    assert "barometer 1008.0 hPa (tag)" in lines[0]
    assert "12.000 bar(a)" in lines[1]
    assert "T  188.0 degC" in lines[1]
    assert "Tsat  187.89 degC" in lines[1]
    assert "superheat   +0.1 K" in lines[1]
    assert lines[1].endswith("good")


def test_plain_view_shows_a_bad_point_without_numbers():
    """A point with bad data shows dashes and the reason, never a stale number."""
    p = PointState(
        "drum", "saturated", {"pressure": Reading(None, bad("sensor_fault"))}, bad("sensor_fault")
    )
    line = plain_lines(_frame([p]))[1]
    assert "p       - bar(a)" in line and line.endswith("bad(sensor_fault)")


def test_plain_view_lists_alarms_most_urgent_first():
    """Alarms are listed by priority, critical first."""
    alarms = [
        AlarmLine("superheat-low", "high", "unacknowledged", True, True),
        AlarmLine("header-superheat-low-low", "critical", "unacknowledged", True, True),
    ]
    last = plain_lines(_frame([_drum()], alarms))[-1]
    assert last.index("header-superheat-low-low") < last.index("superheat-low (high")


def test_plain_view_shows_the_hint():
    """A commissioning hint is printed on the point's line."""
    line = plain_lines(_frame([_drum("set reference: gauge")]))[1]
    assert line.endswith("hint: set reference: gauge")


def test_live_view_renders(capsys):
    """The rich view renders a frame with its points and alarms."""
    from rich.console import Console

    console = Console(width=120, force_terminal=False)
    alarms = [AlarmLine("superheat-low", "high", "unacknowledged", True, True)]
    console.print(render(_frame([_drum()], alarms)))
    out = capsys.readouterr().out
    assert "drum" in out and "superheat-low" in out and "187.89" in out
