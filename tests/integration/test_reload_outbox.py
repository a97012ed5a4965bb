"""What a reload does to queued notifications (issue 10, item 7 c and e), on an in-process
monitor fed by a real Modbus server, with real webhook receivers and a real SQLite file:
rows of a removed channel are retired, and a channel told of a raise is told of its end
after the reload lowered the alarm below its ``min_priority``."""

from __future__ import annotations

import asyncio
import sqlite3

import pytest

from tests.integration.modbus_server import encode, modbus_server
from tests.integration.notify_receiver import Receiver
from tests.integration.servicekit import DRUM_T, registers, running_monitor, wait_for
from tests.integration.servicekit import config_text as base_text

pytestmark = pytest.mark.asyncio
ALARM = "drum-superheat-low"


@pytest.fixture(autouse=True)
def _token(token_env):
    """The test API token in the environment for every test here."""


def _write(path, port: int, channels: list[tuple[str, str, str]], priority: str = "critical"):
    notify = "notify:\n" + "".join(
        f"  - {{name: {n}, webhook: '{url}', min_priority: {floor}, group_window: 0 s,"
        " backoff_max: 1 s}\n"
        for n, url, floor in channels
    )
    text = base_text(port, path.parent / "state.sqlite", extra_alarm=notify)
    path.write_text(text.replace("priority: critical", f"priority: {priority}", 1))
    return path


async def test_rows_of_a_channel_removed_by_a_reload_are_retired(tmp_path):
    """Two channels whose receivers are down hold the alarm's 'raised'; a reload drops one:
    its row is retired (kept, marked), no longer pending; the other still waits."""
    keep, drop = Receiver(None), Receiver(None)  # ports reserved, refusing connections
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = tmp_path / "edge.yaml"
        _write(config, plc.port, [("keep", keep.url, "low"), ("drop", drop.url, "low")])
        async with running_monitor(config) as m:
            await wait_for(lambda: m.outbox.pending_counts() == {"keep": 1, "drop": 1}, 15.0)
            _write(config, plc.port, [("keep", keep.url, "low")])
            await m.reload()
            assert m.outbox.pending_counts(["keep", "drop"]) == {"keep": 1, "drop": 0}
    with sqlite3.connect(tmp_path / "state.sqlite") as c:
        (mark,) = c.execute("SELECT last_error FROM outbox WHERE channel = 'drop'").fetchone()
    assert mark.startswith("retired: ")
    keep.sock.close()
    drop.sock.close()


async def test_a_channel_told_of_a_raise_hears_the_clear_after_priority_lowered(tmp_path):
    """min_priority high; the critical alarm's 'raised' is delivered; a reload makes the
    alarm low; the process returns to normal: the channel still gets the 'cleared'."""
    receiver = Receiver(None)
    await receiver.start()
    try:
        async with modbus_server(holding=registers(drum_c=180.0)) as plc:
            config = tmp_path / "edge.yaml"
            _write(config, plc.port, [("oncall", receiver.url, "high")])
            async with running_monitor(config) as m:
                await wait_for(lambda: receiver.accepted, 15.0)
                _write(config, plc.port, [("oncall", receiver.url, "high")], priority="low")
                await m.reload()
                await plc.set_registers("holding", DRUM_T, encode(190.0, "float32"))
                await wait_for(lambda: len(receiver.accepted) >= 2, 15.0)
                await asyncio.sleep(0.2)
    finally:
        await receiver.stop()
    kinds = [(e["kind"], e["priority"]) for msg in receiver.messages for e in msg["events"]]
    assert kinds == [("raised", "critical"), ("cleared", "low")]
