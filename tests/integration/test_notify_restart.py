"""Notifications queued before a SIGKILL are delivered after the restart."""

import asyncio
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time

import pytest

from edge.config import Channel
from edge.notify import DeliveryWorker, Outbox, build_channel
from tests.integration.notify_receiver import Receiver
from tests.support import stop_task

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

SITE = "riverside-laundry"
SECRET = "riverside-hook-secret"
COUNT = 12

# The first life: queue COUNT events, then try to deliver them to a receiver that refuses
# connections, until killed.
FIRST_LIFE = textwrap.dedent(
    """
    import asyncio, sqlite3, sys
    from edge.config import Channel
    from edge.model import AlarmEvent
    from edge.notify import DeliveryWorker, Outbox, build_channel

    path, url, count = sys.argv[1], sys.argv[2], int(sys.argv[3])

    async def main():
        conn = sqlite3.connect(path)
        conn.execute("PRAGMA journal_mode=WAL")
        outbox = Outbox(conn, site="riverside-laundry")
        cfg = Channel(name="relay", webhook=url, secret_env="RIVERSIDE_HOOK_SECRET",
                      group_window="0 s", backoff_max="200 ms")
        events = [AlarmEvent(alarm="feed-low", kind="raised", time=1714564800.0 + i,
                             priority="critical", message=f"event {i}", id=i,
                             key=f"riverside-laundry/{i}") for i in range(1, count + 1)]
        outbox.enqueue([cfg], events)
        print("queued", flush=True)
        await DeliveryWorker(outbox, build_channel(cfg), base_delay=0.05).run()

    asyncio.run(main())
    """
)


def _attempts(path) -> int:
    conn = sqlite3.connect(path)
    try:
        return conn.execute("SELECT COALESCE(MIN(attempts), 0) FROM outbox").fetchone()[0]
    finally:
        conn.close()


async def test_queued_events_survive_sigkill(tmp_path, monkeypatch):
    """A process killed -9 while its receiver was down: a new outbox delivers every event."""
    monkeypatch.setenv("RIVERSIDE_HOOK_SECRET", SECRET)
    receiver = Receiver(SECRET)  # port reserved, refusing connections
    path = tmp_path / "state.sqlite"
    script = tmp_path / "first_life.py"
    script.write_text(FIRST_LIFE)
    proc = subprocess.Popen(
        [sys.executable, str(script), str(path), receiver.url, str(COUNT)],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        env={**os.environ, "RIVERSIDE_HOOK_SECRET": SECRET},
        text=True,
    )
    try:
        assert proc.stdout is not None
        line = await asyncio.wait_for(asyncio.to_thread(proc.stdout.readline), 30.0)
        assert line.strip() == "queued"
        deadline = time.monotonic() + 15.0
        while _attempts(path) < 2 and time.monotonic() < deadline:  # it tried, and failed
            await asyncio.sleep(0.05)
        assert _attempts(path) >= 2
    finally:
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=10)
        if proc.stdout is not None:
            proc.stdout.close()
    assert proc.returncode == -signal.SIGKILL

    conn = sqlite3.connect(path)
    conn.execute("PRAGMA journal_mode=WAL")
    outbox = Outbox(conn, site=SITE)
    assert outbox.pending("relay") == COUNT
    await receiver.start()
    cfg = Channel(
        name="relay", webhook=receiver.url, secret_env="RIVERSIDE_HOOK_SECRET", group_window="0 s"
    )
    task = asyncio.create_task(DeliveryWorker(outbox, build_channel(cfg)).run())
    try:
        loop = asyncio.get_running_loop()
        deadline = loop.time() + 10.0
        while outbox.pending("relay") and loop.time() < deadline:
            await asyncio.sleep(0.02)
    finally:
        await stop_task(task)
        await receiver.stop()
        conn.close()
    assert sorted(receiver.accepted) == sorted(f"{SITE}/{i}" for i in range(1, COUNT + 1))
    assert receiver.bad_signatures == 0
