"""``steam-edge demo`` as a user runs it: a subprocess with the simulator and the monitor in
one process tree, scraped over HTTP while it runs."""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import threading
from pathlib import Path

import pytest

from tests.integration.simkit import free_port, get_json, scrape, series, wait_for

pytestmark = pytest.mark.slow  # starts processes

POINTS = ("drum", "drum_b", "superheater", "header", "feedwater", "condenser")


class Output:
    """Collects a subprocess's output on a thread, from a pipe or a pty."""

    def __init__(self, fd: int) -> None:
        self.text = ""
        threading.Thread(target=self._read, args=(fd,), daemon=True).start()

    def _read(self, fd: int) -> None:
        while True:
            try:
                chunk = os.read(fd, 65536)
            except OSError:
                return
            if not chunk:
                return
            self.text += chunk.decode(errors="replace")


def demo(args: list[str], tmp_path: Path, **kw) -> subprocess.Popen:
    env = dict(os.environ, TMPDIR=str(tmp_path))  # the run folder lands in tmp_path
    return subprocess.Popen([sys.executable, "-m", "edge", "demo", *args], env=env, **kw)


def stop(proc: subprocess.Popen) -> None:
    if proc.poll() is None:
        proc.send_signal(signal.SIGINT)
        try:
            proc.wait(15)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait()


def test_demo_superheat_falling_shows_good_points_and_the_alarm(tmp_path):
    """``demo --duration 20 --scenario superheat-falling`` serves every point with good
    quality and the low-superheat alarm raised on /metrics, then exits 0."""
    port = free_port()
    proc = demo(
        ["--duration", "20", "--scenario", "superheat-falling", "--listen", f"127.0.0.1:{port}"],
        tmp_path,
        stdout=subprocess.PIPE,
        stderr=subprocess.STDOUT,
    )
    out = Output(proc.stdout.fileno())
    try:

        def raised():
            m = scrape(f"http://127.0.0.1:{port}/metrics")
            good = all(series(m, "steamedge_point_quality", point=p) == 2.0 for p in POINTS)
            alarm = series(m, "steamedge_alarm_active", alarm="superheat-low", priority="high")
            return m if good and alarm == 1.0 else None

        metrics = wait_for(raised, 40.0, "good points and superheat-low on /metrics", every=0.5)
        assert series(metrics, "steamedge_info", version="0.1.0", site="kestrel-mill-dyeworks",
                      mode="advisory") == 1.0  # fmt: skip
        assert series(metrics, "steamedge_superheat_kelvin", point="superheater") < 25.0
        assert proc.wait(40) == 0
    finally:
        stop(proc)
    text = out.text
    assert f"http://127.0.0.1:{port}/metrics" in text
    token = re.search(r"API token  (\S+)", text).group(1)
    assert len(token) >= 32
    assert f"http://127.0.0.1:{port}/api/v1/points" in text  # the API URL
    state = Path(re.search(r"state      (\S+)", text).group(1))
    assert state.parent.parent == tmp_path and state.exists()
    monitor_log = (state.parent / "monitor.log").read_text()
    assert '"event": "started"' in monitor_log and token not in monitor_log
    # stdout is a pipe: plain lines, one block a second, with the alarm in them
    assert re.search(r"^  superheater  p +\d+\.\d+ bar\(a\)", text, re.M)
    assert "superheat-low (high" in text
    assert text.rstrip().endswith("demo stopped")


def test_demo_live_view_switches_scenario_by_key_and_stops_on_interrupt(tmp_path):
    """On a terminal the live view runs, a number key switches the scenario, and Ctrl-C
    (SIGINT) ends the demo with exit status 0, the state file where --state said."""
    import pty

    port, state = free_port(), tmp_path / "kept.sqlite"
    master, slave = pty.openpty()
    proc = demo(
        ["--listen", f"127.0.0.1:{port}", "--state", str(state)],
        tmp_path,
        stdin=slave,
        stdout=slave,
        stderr=slave,
    )
    os.close(slave)
    out = Output(master)
    try:
        control = wait_for(
            lambda: re.search(r"(http://127\.0\.0\.1:\d+)/scenario", out.text), 40.0, "the banner"
        ).group(1)
        wait_for(lambda: "keys: 1 normal" in out.text, 10.0, "the live view with its keys")
        os.write(master, b"5")  # 5: gauge-as-absolute
        wait_for(
            lambda: get_json(control + "/scenario")["scenario"] == "gauge-as-absolute",
            5.0,
            "the key to switch the scenario",
        )
        wait_for(lambda: "scenario gauge-as-absolute" in out.text, 5.0, "the view redrawn after it")
        assert get_json(f"http://127.0.0.1:{port}/api/v1/points")["points"]
        proc.send_signal(signal.SIGINT)
        assert proc.wait(15) == 0
    finally:
        stop(proc)
        os.close(master)
    assert "\x1b[" in out.text  # drawn with terminal control sequences, not plain lines
    assert "demo stopped" in out.text
    assert state.exists()
