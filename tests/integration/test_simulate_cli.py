"""``steam-edge simulate`` as a user runs it: the scenario to start in, the endpoints it
prints, and a bounded run that ends with exit status 0."""

from __future__ import annotations

import subprocess
import sys
import threading

import pytest

from tests.integration.simkit import free_port, get_json, wait_for

pytestmark = pytest.mark.slow  # starts processes


def test_simulate_starts_in_the_scenario_asked_and_stops_after_its_duration():
    """``simulate --scenario link-drop --duration 3`` serves that scenario and exits 0."""
    modbus, opcua, control = free_port(), free_port(), free_port()
    proc = subprocess.Popen(
        [sys.executable, "-m", "edge", "simulate", "--scenario", "link-drop", "--duration", "3",
         "--modbus-port", str(modbus), "--opcua-port", str(opcua), "--control-port", str(control)],
        stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
    )  # fmt: skip
    lines: list[str] = []
    reader = threading.Thread(target=lambda: lines.extend(proc.stdout), daemon=True)
    reader.start()
    try:
        url = f"http://127.0.0.1:{control}/scenario"
        status = wait_for(lambda: get_json(url), 30.0, "the control endpoint")
        assert status["scenario"] == "link-drop"
        assert proc.wait(30) == 0
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    reader.join(5)
    text = "".join(lines)
    assert "scenario link-drop" in text
    assert f"Modbus TCP  127.0.0.1:{modbus}" in text
    assert f"opc.tcp://127.0.0.1:{opcua}/boiler-house" in text
    assert text.rstrip().endswith("simulator stopped")
