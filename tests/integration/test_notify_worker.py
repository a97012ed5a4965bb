"""The delivery worker over a real SQLite outbox, with time driven by the test.

The channel here is a recording implementation of the Channel port (no HTTP): the HTTP
channels are tested against real servers in test_notify_webhook.py and
test_alertmanager.py.
"""

import asyncio
import sqlite3

import pytest

from edge.config import Channel
from edge.model import AlarmEvent
from edge.notify import DeliveryFailed, DeliveryWorker, Outbox, OutboxItem
from edge.notify.base import BaseChannel
from tests.support import FakeClock, stop_task

SITE = "riverside-laundry"
pytestmark = pytest.mark.asyncio


class Recorder(BaseChannel):
    """Records batches; fails the next `fail` deliveries with the given status."""

    def __init__(self, cfg: Channel, *, fail: int = 0, status: int = 500, retry_after=None):
        super().__init__(cfg)
        self.batches: list[list[OutboxItem]] = []
        self.fail = fail
        self.status = status
        self.retry_after = retry_after
        self.refreshes = 0
        self.closed = False

    async def deliver(self, batch):
        if self.fail:
            self.fail -= 1
            raise DeliveryFailed(
                self.name, "boom", status=self.status, retry_after=self.retry_after
            )
        self.batches.append(batch)

    async def refresh(self):
        self.refreshes += 1

    async def aclose(self):
        self.closed = True


def _cfg(**kw) -> Channel:
    kw.setdefault("group_window", "5 s")
    kw.setdefault("backoff_max", "300 s")
    return Channel(name="oncall", webhook="http://127.0.0.1:1/", **kw)


def _events(first: int, n: int) -> list[AlarmEvent]:
    return [
        AlarmEvent(alarm=f"a{i}", kind="raised", time=1.0, priority="high", id=i, key=f"{SITE}/{i}")
        for i in range(first, first + n)
    ]


@pytest.fixture
def clock():
    return FakeClock()


@pytest.fixture
def outbox(tmp_path, clock):
    conn = sqlite3.connect(tmp_path / "state.sqlite")
    conn.execute("PRAGMA journal_mode=WAL")
    yield Outbox(conn, site=SITE, clock=clock)
    conn.close()


def _worker(outbox, channel, clock, **kw) -> DeliveryWorker:
    return DeliveryWorker(outbox, channel, clock=clock, rand=lambda: 1.0, **kw)


async def test_flood_goes_as_one_message(outbox, clock):
    """Fifty events queued inside the group window are delivered as one message."""
    cfg = _cfg()
    ch = Recorder(cfg)
    worker = _worker(outbox, ch, clock)
    for n in range(50):
        outbox.enqueue([cfg], _events(n + 1, 1))
        clock.t += 0.05
    assert await worker.run_once() == pytest.approx(2.5)  # the window is still open
    clock.t = 1005.0  # first event queued at 1000.0, window 5 s
    assert await worker.run_once() == 0.0
    assert [len(b) for b in ch.batches] == [50]
    assert outbox.pending("oncall") == 0


async def test_window_holds_the_first_event(outbox, clock):
    """A lone event waits for the rest of its group window before it goes."""
    cfg = _cfg(group_window="5 s")
    ch = Recorder(cfg)
    outbox.enqueue([cfg], _events(1, 1))
    clock.t += 1.0
    assert await _worker(outbox, ch, clock).run_once() == pytest.approx(4.0)
    assert ch.batches == []


async def test_batch_limit_sends_a_full_batch_at_once(outbox, clock):
    """A burst larger than batch_limit goes at once in batches of that size."""
    cfg = _cfg()
    ch = Recorder(cfg)
    worker = _worker(outbox, ch, clock, batch_limit=20)
    outbox.enqueue([cfg], _events(1, 45))
    assert await worker.run_once() == 0.0
    assert await worker.run_once() == 0.0
    assert [len(b) for b in ch.batches] == [20, 20]


async def test_backoff_grows_and_is_capped(outbox, clock):
    """Consecutive failures wait 1, 2, 4, 8 s ... never more than backoff_max."""
    cfg = _cfg(group_window="0 s", backoff_max="10 s")
    ch = Recorder(cfg, fail=6)
    worker = _worker(outbox, ch, clock)
    outbox.enqueue([cfg], _events(1, 1))
    delays = []
    for _ in range(6):
        delay = await worker.run_once()
        delays.append(delay)
        clock.t += delay
    assert delays == [1.0, 2.0, 4.0, 8.0, 10.0, 10.0]
    assert outbox.due("oncall", clock.t)[0].attempts == 6


async def test_nothing_is_dropped_after_many_failures(outbox, clock):
    """After twenty failures the events are still queued and go out when the receiver heals."""
    cfg = _cfg(group_window="0 s", backoff_max="1 s")
    ch = Recorder(cfg, fail=20)
    worker = _worker(outbox, ch, clock)
    outbox.enqueue([cfg], _events(1, 3))
    while not ch.batches:
        clock.t += await worker.run_once()
    assert worker.failed_attempts == 20
    # three alarms of one priority: the one with the newest event first (Outbox.due)
    assert [i.key for i in ch.batches[0]] == [f"{SITE}/{n}" for n in (3, 2, 1)]
    assert outbox.pending("oncall") == 0


async def test_new_event_waits_out_the_backoff(outbox, clock):
    """An event queued during a backoff is not sent before the backoff ends."""
    cfg = _cfg(group_window="0 s")
    ch = Recorder(cfg, fail=1)
    worker = _worker(outbox, ch, clock)
    outbox.enqueue([cfg], _events(1, 1))
    assert await worker.run_once() == 1.0
    clock.t += 0.5
    outbox.enqueue([cfg], _events(2, 1))
    assert await worker.run_once() == pytest.approx(0.5)
    clock.t += 0.5
    assert await worker.run_once() == 0.0
    assert [len(b) for b in ch.batches] == [2]


async def test_retry_after_is_honoured(outbox, clock):
    """A receiver's Retry-After lengthens the wait (up to backoff_max)."""
    cfg = _cfg(group_window="0 s", backoff_max="60 s")
    ch = Recorder(cfg, fail=1, status=429, retry_after=30.0)
    outbox.enqueue([cfg], _events(1, 1))
    assert await _worker(outbox, ch, clock).run_once() == 30.0


async def test_refresh_runs_when_idle_at_its_interval(outbox, clock):
    """A channel with a refresh interval is refreshed when the queue is empty, once per interval."""
    cfg = _cfg()
    ch = Recorder(cfg)
    ch.refresh_interval = 60.0
    worker = _worker(outbox, ch, clock)
    assert await worker.run_once() == 1.0  # idle poll
    clock.t += 30.0
    await worker.run_once()
    clock.t += 30.0
    await worker.run_once()
    assert ch.refreshes == 2


async def test_refresh_waits_while_items_are_pending(outbox, clock):
    """No refresh while undelivered items wait (a clear must not be overtaken)."""
    cfg = _cfg(group_window="0 s")
    ch = Recorder(cfg, fail=1)
    ch.refresh_interval = 1.0
    worker = _worker(outbox, ch, clock)
    outbox.enqueue([cfg], _events(1, 1))
    await worker.run_once()
    clock.t += 0.5
    await worker.run_once()
    assert ch.refreshes == 0


async def test_run_wakes_on_enqueue_and_closes_on_cancel(outbox):
    """run() delivers soon after an enqueue (no polling) and closes the channel on cancel."""
    cfg = _cfg(group_window="0 s")
    ch = Recorder(cfg)
    worker = DeliveryWorker(outbox, ch, idle=30.0)
    task = asyncio.create_task(worker.run())
    await asyncio.sleep(0.05)
    outbox.enqueue([cfg], _events(1, 1))
    loop = asyncio.get_running_loop()
    deadline = loop.time() + 5.0
    while not ch.batches and loop.time() < deadline:
        await asyncio.sleep(0.01)
    took = loop.time() - (deadline - 5.0)
    await stop_task(task)
    assert len(ch.batches) == 1
    assert took < 2.0  # far below the 30 s idle poll
    assert ch.closed


async def test_storage_failure_after_delivery_resends(outbox):
    """If the delivery cannot be recorded, the items go again (at-least-once), never lost."""
    cfg = _cfg(group_window="0 s", backoff_max="50 ms")
    ch = Recorder(cfg)
    outbox.enqueue([cfg], _events(1, 2))
    outbox._conn.execute("PRAGMA query_only = ON")  # every write now fails
    worker = DeliveryWorker(outbox, ch, base_delay=0.01)
    task = asyncio.create_task(worker.run())
    loop = asyncio.get_running_loop()
    deadline = loop.time() + 5.0
    while len(ch.batches) < 2 and loop.time() < deadline:
        await asyncio.sleep(0.01)
    assert outbox.pending("oncall") == 2  # sent, but not recorded as delivered
    outbox._conn.execute("PRAGMA query_only = OFF")
    while outbox.pending("oncall") and loop.time() < deadline:
        await asyncio.sleep(0.01)
    await stop_task(task)
    assert outbox.pending("oncall") == 0
    assert {i.key for b in ch.batches for i in b} == {f"{SITE}/1", f"{SITE}/2"}
    assert len(ch.batches) >= 3  # the same two events went more than once
