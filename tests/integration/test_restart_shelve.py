"""A shelve that expires while the monitor is down (issue 10, item 8): states that change
without an event are saved, and the first passes after a start do not judge alarms before
data arrives, so the restart raises (and notifies) nothing spurious. In-process monitors
on a real SQLite file, fed by a real Modbus server."""

from __future__ import annotations

import asyncio
import json
import signal
import sqlite3

import pytest

from tests.integration.modbus_server import encode, modbus_server
from tests.integration.servicekit import (
    DRUM_T,
    ServiceProcess,
    auth,
    get_json,
    post,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio
ALARM = "drum-superheat-low"


@pytest.fixture(autouse=True)
def _token(token_env):
    """The test API token in the environment for every test here."""


async def test_a_shelve_expiring_while_down_raises_nothing_on_restart(tmp_path):
    """Alarm active and shelved for 1.5 s when the monitor stops; the process returns to
    normal and the shelve expires while nothing runs; after the start the journal gets no
    'raised' (the first passes, before data, do not judge the stale saved state)."""
    # 9 barg + 97 kPa -> Tsat about 179.5 degC: 180 degC is 0.5 K superheat (alarm), 190 is 10.5
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.alarm_states[ALARM].active, timeout=15.0)
            await m.act("shelve", ALARM, user="op", comment="sensor work", duration=1.5)
            last = max(e.id or 0 for e in m.events(0, 1000))
        await plc.set_registers("holding", DRUM_T, encode(190.0, "float32"))
        await asyncio.sleep(1.6)  # the shelve expires while nothing runs
        async with running_monitor(config) as m:
            await wait_for(lambda: m.readiness()["source"], timeout=15.0)
            await wait_for(lambda: not m.alarm_states[ALARM].active, timeout=5.0)
            await asyncio.sleep(0.5)
            kinds = [e.kind for e in m.events(last, 1000) if e.alarm == ALARM]
            assert "raised" not in kinds, kinds
            assert not m.alarm_states[ALARM].shelved


@pytest.mark.slow
async def test_a_silent_change_is_saved_before_a_sigkill(tmp_path):
    """A real ``steam-edge run``: the alarm, shelved, follows the process back to normal
    without an event; 1.5 s later the process is SIGKILLed; the state saved on disk says
    not active, so a start after the shelve expired raises nothing."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        service = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: service.url)
            alarm_url = f"{url}/api/v1/alarms"

            async def state() -> dict:
                _, body = await get_json(alarm_url)
                return {a["name"]: a for a in body["alarms"]}[ALARM]

            await wait_for(lambda: _active(state), timeout=20.0, step=0.2)
            status, _ = await post(
                f"{alarm_url}/{ALARM}/shelve",
                {"user": "op", "reason": "sensor work", "duration": "2 s"},
                auth(),
            )
            assert status == 200
            await plc.set_registers("holding", DRUM_T, encode(190.0, "float32"))
            await wait_for(lambda: _active(state, False), timeout=10.0, step=0.2)
            await asyncio.sleep(1.5)
            service.proc.send_signal(signal.SIGKILL)
            service.proc.wait(10)
        finally:
            service.stop()
        await asyncio.sleep(1.0)  # the shelve expires while nothing runs
        with sqlite3.connect(tmp_path / "state.sqlite") as c:
            last = c.execute("SELECT MAX(id) FROM alarm_events").fetchone()[0]
            saved = json.loads(
                c.execute("SELECT data FROM alarm_states WHERE name = ?", (ALARM,)).fetchone()[0]
            )
        assert saved["active"] is False
        async with running_monitor(config) as m:
            await wait_for(lambda: m.readiness()["source"], timeout=15.0)
            await asyncio.sleep(0.5)
            kinds = [e.kind for e in m.events(last, 1000) if e.alarm == ALARM]
            assert "raised" not in kinds, kinds


async def _active(state, want: bool = True) -> bool:
    return (await state())["active"] is want


async def test_alarms_are_not_judged_before_the_first_data(tmp_path):
    """Right after start, before any sample came in, the monitor holds its alarms
    (``judging`` false); once every tag has a sample it judges them."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        await plc.stop()  # no data for now
        async with running_monitor(config) as m:
            assert m.runtime is not None and not m.runtime.judging
            await plc.start()
            await wait_for(lambda: m.runtime.judging, timeout=15.0)
            await wait_for(lambda: m.alarm_states[ALARM].active, timeout=15.0)
