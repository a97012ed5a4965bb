"""``steam-edge run`` with a publishing channel, as a process: the Sparkplug death
certificate is the MQTT will (a killed monitor still gets its NDEATH), and a refused login
is one log line per attempt, nothing on stderr, the monitor running on."""

from __future__ import annotations

import json
import signal
import time

import pytest

from tests.integration.modbus_server import modbus_server
from tests.integration.mosquitto_server import USERS, Broker
from tests.integration.servicekit import ServiceProcess, registers
from tests.integration.sparkplug_schema import parse
from tests.integration.test_publish_mqtt import Watcher, config
from tests.support import until

pytestmark = [pytest.mark.slow, pytest.mark.asyncio]


async def test_killed_monitor_gets_its_ndeath_from_the_broker(tmp_path):
    """SIGKILL after the birth: the broker publishes the will, an NDEATH whose bdSeq is the
    NBIRTH's, QoS 1, not retained (Sparkplug 3.0, tck-id-topics-ndeath-payload)."""
    ns = "spBv1.0/plant-fleet"
    with Broker(tmp_path / "broker") as broker:
        async with modbus_server(holding=registers()) as server, Watcher(broker) as w:
            cfg = config(
                tmp_path, server.port, broker.url, format="sparkplug-b", group="plant-fleet"
            )
            svc = ServiceProcess(cfg, {"STEAMEDGE_TEST_MQTT_PASSWORD": USERS["edge"]})
            try:
                await until(lambda: w.on(f"{ns}/NBIRTH/"), 30)
                svc.signal(signal.SIGKILL)
                await until(lambda: w.on(f"{ns}/NDEATH/"), 10)
            finally:
                svc.stop()
    birth = {m.name: m for m in parse(w.on(f"{ns}/NBIRTH/")[0][1]).metrics}
    death = parse(w.on(f"{ns}/NDEATH/")[0][1])
    assert [(m.name, m.long_value) for m in death.metrics] == [("bdSeq", birth["bdSeq"].long_value)]
    retained = [r for t, _, r in w.messages if "/NDEATH/" in t]
    assert retained == [False]


async def test_refused_login_is_one_line_per_attempt_in_the_log(tmp_path):
    """A wrong password: one JSON error line per attempt naming the refused login, nothing
    but the start banner on stderr, no traceback; the monitor runs on and stops with 0."""
    with Broker(tmp_path / "broker") as broker:
        async with modbus_server(holding=registers()) as server:
            cfg = config(tmp_path, server.port, broker.url)
            svc = ServiceProcess(cfg, {"STEAMEDGE_TEST_MQTT_PASSWORD": "wrong-password"})
            try:
                svc.wait_event("http_listening")
                deadline = time.monotonic() + 15
                while time.monotonic() < deadline:
                    if (
                        len([e for e in svc.events() if e.get("event") == "publish_connect_failed"])
                        >= 2
                    ):
                        break
                    time.sleep(0.1)
                assert svc.proc.poll() is None
            finally:
                code = svc.stop()
    publish_lines = [e for e in svc.events() if e.get("component") == "publish"]
    failed = [e for e in publish_lines if e["event"] == "publish_connect_failed"]
    assert len(failed) >= 2 and all("refused the login" in e["error"] for e in failed)
    assert {e["event"] for e in publish_lines} == {"publish_connect_failed"}
    assert not [line for line in svc.lines if "Traceback" in line]
    banner = ("steam-edge 0.1.0", "steam-edge is advisory only")  # printed on every start
    assert not [ln for ln in svc.stderr if ln.strip() and not ln.startswith(banner)]
    assert code == 0
    assert all(json.loads(line) for line in svc.lines if line.startswith("{"))
