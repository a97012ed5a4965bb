"""Alarms raised per demo scenario: how many alarms one plant fault puts in front of the
operator (ISA-18.2: each alarm unique, pointing to one cause).

Run: ``python tests/bench/alarm_scenarios.py [--seconds 20] [--json]``

``steam-edge simulate`` (speed 4) and ``steam-edge run`` on the demo config (the same short
timings as tests/integration/test_scenarios.py) run as subprocesses. For each of the seven
scenarios in turn: back to ``normal`` until every point is good and no alarm stands, then
the scenario for ``--seconds`` wall-clock seconds; the figure is the number of ``raised``
events the journal got meanwhile, by alarm, and whether the flood flag came up. The
baseline in the same run is ``normal`` itself (what a healthy plant raises in that time).
"""

from __future__ import annotations

import argparse
import json
import os
import signal
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.integration.simkit import free_port, get_json, put_json, wait_for  # noqa: E402
from tests.integration.test_scenarios import POINTS, monitor_config  # noqa: E402

SCENARIOS = (
    "normal",
    "load-swing",
    "superheat-falling",
    "transmitter-failure",
    "gauge-as-absolute",
    "link-drop",
    "barometer-stale",
)


def _events(api: str, since: int) -> tuple[list[dict], int]:
    out: list[dict] = []
    while True:
        page = get_json(f"{api}/events?since={since}&limit=1000")
        out += page["events"]
        if not page["events"]:
            return out, since
        since = page["next"]


def _quiet(api: str) -> bool:
    data = get_json(api + "/points")
    good = len(data["points"]) == len(POINTS) and all(
        p["quality"] == "good" for p in data["points"]
    )
    alarms = get_json(api + "/alarms")["alarms"]
    return good and all(a["active"] is False for a in alarms)


def measure(seconds: float) -> dict[str, dict]:
    folder = Path(tempfile.mkdtemp(prefix="alarm-bench-"))
    modbus, opcua, control, http = free_port(), free_port(), free_port(), free_port()
    env = dict(os.environ, STEAMEDGE_TEST_TOKEN="bench-token-4c2d-0000")
    sim = subprocess.Popen(
        [sys.executable, "-m", "edge", "simulate", "--speed", "4", "--seed", "7",
         "--modbus-port", str(modbus), "--opcua-port", str(opcua), "--control-port", str(control)],
        stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env, cwd=ROOT,
    )  # fmt: skip
    mon = None
    results: dict[str, dict] = {}
    try:
        assert sim.stdout is not None
        for line in sim.stdout:
            if "ready" in line:
                break
        config = monitor_config(folder, modbus, opcua, f"127.0.0.1:{http}")
        log = (folder / "monitor.log").open("w")
        mon = subprocess.Popen(
            [sys.executable, "-m", "edge", "run", "-c", str(config)],
            stdout=log, stderr=subprocess.STDOUT, env=env, cwd=ROOT,
        )  # fmt: skip
        api = f"http://127.0.0.1:{http}/api/v1"
        ctrl = f"http://127.0.0.1:{control}/scenario"
        wait_for(lambda: _quiet(api), 60.0, "a quiet plant")
        _, since = _events(api, 0)
        for name in SCENARIOS:
            put_json(ctrl, {"name": "normal"})
            wait_for(lambda: _quiet(api), 60.0, "a quiet plant")
            _, since = _events(api, since)
            put_json(ctrl, {"name": name})
            time.sleep(seconds)
            health = get_json(api + "/alarms")["health"] or {}
            events, since = _events(api, since)
            raised = [e["alarm"] for e in events if e["kind"] == "raised"]
            results[name] = {
                "raised": len(raised),
                "alarms": sorted(set(raised)),
                "flood": bool(health.get("flood")),
            }
            print(f"{name:20} raised {len(raised):3}  {', '.join(sorted(set(raised)))}", flush=True)
    finally:
        for proc in (mon, sim):
            if proc is not None and proc.poll() is None:
                proc.send_signal(signal.SIGINT)
        for proc in (mon, sim):
            if proc is not None:
                try:
                    proc.wait(10)
                except subprocess.TimeoutExpired:
                    proc.kill()
    return results


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seconds", type=float, default=20.0)
    parser.add_argument("--json", action="store_true")
    args = parser.parse_args()
    results = measure(args.seconds)
    base = results["normal"]["raised"]
    total = sum(r["raised"] for n, r in results.items() if n != "normal")
    print(f"baseline (normal): {base} raised; six fault scenarios: {total} raised in total")
    if args.json:
        print(json.dumps(results, indent=2))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
