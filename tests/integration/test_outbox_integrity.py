"""Outbox order, bounds and leftovers (issue 10, item 7), on a real SQLite file: per alarm
delivery keeps journal order even when a newer row is due before an older retry; the
queue is bounded, dropping the oldest least-urgent rows but never an alarm's newest; rows
of a removed channel are retired; urgent alarms go first; a channel told of a raise is
told of its end after a reload lowered the alarm's priority."""

from __future__ import annotations

import sqlite3
import time
from pathlib import Path

import pytest

from edge.config import Channel
from edge.model import AlarmEvent
from edge.notify import Outbox
from tests.support import FakeClock

SITE = "riverside-laundry"
HOOK = Channel(name="oncall", webhook="http://127.0.0.1:1/hook")


def ev(n: int, alarm: str = "drum-high", kind: str = "raised", priority: str = "high"):
    return AlarmEvent(
        alarm=alarm, kind=kind, time=900.0 + n, priority=priority, id=n, key=f"{SITE}/{n}"
    )


@pytest.fixture
def clock() -> FakeClock:
    return FakeClock()


def _outbox(path: Path, clock: FakeClock, **kw: object) -> tuple[sqlite3.Connection, Outbox]:
    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA journal_mode=WAL")
    return conn, Outbox(conn, site=SITE, clock=clock, **kw)  # type: ignore[arg-type]


def test_a_newer_row_never_overtakes_an_older_retry_of_its_alarm(tmp_path, clock):
    """'raised' failed and waits 60 s for its retry; the 'cleared' queued after it (a
    restart makes it due at once) is not handed out before it; at the retry both go, in
    journal order. Another alarm is not held up (it goes first: its event is the newest)."""
    conn, box = _outbox(tmp_path / "s.sqlite", clock)
    box.enqueue([HOOK], [ev(1)])
    (first,) = box.due("oncall", clock.t)
    box.mark_failed([first.id], clock.t + 60.0, "HTTP 503")
    conn.close()
    conn, box = _outbox(tmp_path / "s.sqlite", clock)  # a restart
    box.enqueue([HOOK], [ev(2, kind="cleared"), ev(3, alarm="hp-low")])
    assert [i.key for i in box.due("oncall", clock.t)] == [f"{SITE}/3"]
    clock.t += 60.0
    assert [i.key for i in box.due("oncall", clock.t)] == [f"{SITE}/3", f"{SITE}/1", f"{SITE}/2"]
    conn.close()


def test_the_queue_is_bounded_and_keeps_each_alarms_newest_row(tmp_path, clock):
    """5,001 undelivered rows with a bound of 1,000: 1,000 stay, 4,001 are dropped and
    counted, low priority first, and every alarm's newest row survives."""
    conn, box = _outbox(tmp_path / "s.sqlite", clock, max_pending=1000)
    events = [
        ev(n, alarm=f"a{n % 50}", priority="low" if n % 2 else "high") for n in range(1, 5002)
    ]
    for start in range(0, len(events), 500):
        box.enqueue([HOOK], events[start : start + 500])
    assert box.pending("oncall") == 1000
    assert box.dropped == 4001
    newest = {f"a{a}": max(n for n in range(1, 5002) if n % 50 == a) for a in range(50)}
    kept = {r[0] for r in conn.execute("SELECT key FROM outbox")}
    assert {f"{SITE}/{n}" for n in newest.values()} <= kept
    (lows,) = conn.execute("SELECT COUNT(*) FROM outbox WHERE priority = 'low'").fetchone()
    assert lows <= 50  # only the alarms' newest low rows: high ones were kept first
    conn.close()


def test_rows_of_a_removed_channel_are_retired_not_pending(tmp_path, clock):
    """After ``retire(["oncall"])`` its three rows are no longer pending, stay in the file
    marked 'retired: ...', and are not taken for what the receiver was told."""
    conn, box = _outbox(tmp_path / "s.sqlite", clock)
    box.enqueue([HOOK], [ev(1), ev(2), ev(3)])
    assert box.retire(["oncall"]) == 3
    assert box.pending_counts(["oncall"]) == {"oncall": 0}
    marks = [r[0] for r in conn.execute("SELECT last_error FROM outbox")]
    assert len(marks) == 3 and all(m.startswith("retired: ") for m in marks)
    assert box.latest_delivered("oncall") == []
    conn.close()


def test_a_new_critical_alarm_is_not_queued_behind_a_backlog(tmp_path, clock):
    """50,000 low-priority rows of 500 alarms wait (copied in by SQL from one queued row);
    a critical event queued after them is the first one handed out."""
    conn, box = _outbox(tmp_path / "s.sqlite", clock)
    box.enqueue([HOOK], [ev(1, alarm="trap-0", priority="low")])
    conn.execute(
        "WITH RECURSIVE n(i) AS (SELECT 2 UNION ALL SELECT i + 1 FROM n WHERE i < 50000) "
        "INSERT INTO outbox (channel, key, event_id, alarm, kind, priority, payload, created,"
        " next_try) SELECT o.channel, ? || n.i, n.i, 'trap-' || (n.i % 500), o.kind,"
        " o.priority, o.payload, o.created, o.next_try FROM n, outbox o",
        (f"{SITE}/",),
    )
    assert box.pending("oncall") == 50_000
    box.enqueue([HOOK], [ev(50_001, alarm="drum-low-water", priority="critical")])
    due = box.due("oncall", clock.t, limit=100)
    assert due[0].key == f"{SITE}/50001" and len(due) == 100
    conn.close()


def test_a_channel_told_of_a_raise_is_told_of_its_end_after_priority_lowered(tmp_path, clock):
    """Channel min_priority high: the alarm's 'raised' (high) is queued; after a reload
    lowered it to low, its 'cleared' (low) is still queued for that channel, while a low
    alarm the channel never heard of is not."""
    channel = Channel(name="oncall", webhook="http://127.0.0.1:1/hook", min_priority="high")
    conn, box = _outbox(tmp_path / "s.sqlite", clock)
    assert box.enqueue([channel], [ev(1)]) == 1
    box.mark_delivered([i.id for i in box.due("oncall", clock.t)])
    assert box.enqueue([channel], [ev(2, kind="cleared", priority="low")]) == 1
    assert box.enqueue([channel], [ev(3, alarm="other", kind="cleared", priority="low")]) == 0
    conn.close()


@pytest.mark.slow
@pytest.mark.asyncio
async def test_after_a_restart_the_clear_is_delivered_after_the_raise(tmp_path):
    """A real ``steam-edge run`` raises an alarm while its webhook receiver is down; it
    stops with the 'raised' waiting for a retry 5 s away; the process returns to normal and
    the monitor starts again with the receiver up: the receiver gets 'raised' before
    'cleared' (the new row waits for the older retry of its alarm)."""
    import asyncio

    from tests.integration.modbus_server import encode, modbus_server
    from tests.integration.notify_receiver import Receiver
    from tests.integration.servicekit import DRUM_T, ServiceProcess, registers, write_config

    receiver = Receiver(None)  # port reserved, refusing connections
    notify = (
        "notify:\n"
        f"  - {{name: relay, webhook: '{receiver.url}', group_window: 0 s, backoff_max: 1 s}}\n"
    )
    state = tmp_path / "state.sqlite"
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port, extra_alarm=notify)
        service = ServiceProcess(config)
        try:
            await asyncio.to_thread(service.wait_event, "notify_failed", 30.0)
        finally:
            assert service.stop() == 0
        with sqlite3.connect(state) as c:
            rows = c.execute("SELECT kind FROM outbox WHERE delivered IS NULL").fetchall()
            assert ("raised",) in rows
            c.execute("UPDATE outbox SET next_try = ?", (time.time() + 5.0,))
        await plc.set_registers("holding", DRUM_T, encode(190.0, "float32"))
        await receiver.start()
        service = ServiceProcess(config)
        try:
            deadline = time.monotonic() + 20.0
            while len(receiver.accepted) < 2 and time.monotonic() < deadline:
                await asyncio.sleep(0.1)
        finally:
            service.stop()
            await receiver.stop()
    kinds = [e["kind"] for m in receiver.messages for e in m["events"]]
    assert kinds == ["raised", "cleared"], kinds
