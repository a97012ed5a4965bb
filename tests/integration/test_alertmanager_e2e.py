"""End to end with a real Alertmanager (Debian prometheus-alertmanager on 127.0.0.1): the
running monitor, fed by a real Modbus server, raises an alarm that appears in
``GET /api/v2/alerts`` with its labels and the advisory note, and resolves it when the
process value returns. Alertmanager keeps its default resolve_timeout (5 min) here, so the
alert can only go away because the monitor posted its end."""

from __future__ import annotations

import asyncio

import pytest

from edge import ADVISORY_NOTICE
from tests.integration.alertmanager_server import alerts, running_alertmanager
from tests.integration.modbus_server import encode, modbus_server
from tests.integration.servicekit import (
    DRUM_T,
    TOKEN,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

ALARM = "drum-superheat-low"
AM_CONFIG = """
route:
  receiver: blackhole
receivers:
  - name: blackhole
"""


@pytest.fixture
def alertmanager(tmp_path):
    """A running Alertmanager with its default resolve_timeout; yields its base URL."""
    with running_alertmanager(tmp_path, AM_CONFIG) as base:
        yield base


def _with_alertmanager(config, base: str) -> None:
    channel = (
        "notify:\n"
        f"  - {{name: cluster, alertmanager: '{base}', group_window: 100 ms,"
        " backoff_max: 1 s}\n"
    )
    config.write_text(config.read_text().replace("http:", channel + "http:", 1))


async def test_monitor_alarm_opens_and_resolves_an_alertmanager_alert(
    tmp_path, monkeypatch, alertmanager
):
    """Low superheat raises drum-superheat-low: Alertmanager lists it with alertname, site,
    priority and the advisory note; superheat back above the limit: the alert resolves."""
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", TOKEN)
    # 9 barg + 97 kPa: Tsat about 179.5 degC; 180 degC is 0.5 K superheat (< 5 K)
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        _with_alertmanager(config, alertmanager)
        async with running_monitor(config) as m:

            def listed() -> list[dict]:
                return alerts(alertmanager, ALARM)

            await wait_for(lambda: asyncio.to_thread(listed), timeout=15.0, step=0.1)
            (alert,) = await asyncio.to_thread(listed)
            raised = next(e for e in m.events(0, 1000) if e.kind == "raised")
            await plc.set_registers("holding", DRUM_T, encode(200.0, "float32"))  # ~20 K

            async def resolved() -> bool:
                return not await asyncio.to_thread(listed)

            await wait_for(resolved, timeout=15.0, step=0.1)
            cleared = [e for e in m.events(0, 1000) if e.kind == "cleared" and e.alarm == ALARM]
    assert alert["labels"] == {
        "alertname": ALARM,
        "site": "riverside-laundry",
        "priority": "critical",
        "severity": "critical",
    }
    assert alert["annotations"]["summary"] == "Superheat at the drum outlet is low"
    assert alert["annotations"]["advisory"] == ADVISORY_NOTICE
    assert alert["annotations"]["event_key"] == f"riverside-laundry/{raised.id}"
    assert len(cleared) == 1
