"""Acknowledging every alarm of one priority over the HTTP API of a running monitor (a real
Modbus server, a real aiohttp server, a real SQLite journal)."""

from __future__ import annotations

import pytest

from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    TOKEN,
    auth,
    post,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio

DRUM, HP = "drum-superheat-low", "hp-superheat-low"  # critical, high
HP_ALARM = """\
  - name: hp-superheat-low
    signal: hp_header.superheat
    low: 20 K
    priority: high
"""


async def test_ack_of_a_priority_acknowledges_only_that_priority(tmp_path, monkeypatch):
    """POST /api/v1/priorities/critical/ack acknowledges the critical alarm, records who and
    why in the journal, and leaves the high-priority alarm unacknowledged."""
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", TOKEN)
    async with modbus_server(holding=registers(drum_c=180.0, hp_c=260.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port, extra_alarm=HP_ALARM)
        async with running_monitor(config) as m:
            await wait_for(
                lambda: all(m.alarm_states[n].state == "unacknowledged" for n in (DRUM, HP)),
                timeout=15.0,
            )
            status, body = await post(
                m.url + "/api/v1/priorities/critical/ack",
                {"user": "night-shift", "comment": "boiler 1 on manual"},
                auth(),
            )
            states = {n: m.alarm_states[n].state for n in (DRUM, HP)}
            journal = [e for e in m.events(0, 1000) if e.kind == "acknowledged"]
    assert status == 200
    assert [(e["alarm"], e["kind"]) for e in body["events"]] == [(DRUM, "acknowledged")]
    assert states == {DRUM: "acknowledged", HP: "unacknowledged"}
    assert [(e.alarm, e.user, e.comment) for e in journal] == [
        (DRUM, "night-shift", "boiler 1 on manual")
    ]
