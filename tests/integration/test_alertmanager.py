"""The Alertmanager channel against a real Alertmanager (Debian prometheus-alertmanager)
started on 127.0.0.1 with its own storage and configuration."""

import asyncio
import sqlite3
import time
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager

import pytest

from edge import ADVISORY_NOTICE
from edge.config import Channel
from edge.model import AlarmEvent
from edge.notify import AlertmanagerChannel, DeliveryWorker, Outbox
from tests.integration.alertmanager_server import alerts, running_alertmanager
from tests.support import stop_task

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

SITE = "riverside-laundry"
RESOLVE_TIMEOUT = 2.0  # seconds; Alertmanager resolves an alert not posted again by then

AM_CONFIG = f"""
global:
  resolve_timeout: {RESOLVE_TIMEOUT:g}s
route:
  receiver: blackhole
  group_wait: 1s
receivers:
  - name: blackhole
"""


@pytest.fixture(scope="module")
def alertmanager(tmp_path_factory):
    """A running Alertmanager; yields its base URL; stopped by PID afterwards."""
    with running_alertmanager(tmp_path_factory.mktemp("alertmanager"), AM_CONFIG) as base:
        yield base


async def _until(predicate, timeout: float) -> bool:
    loop = asyncio.get_running_loop()
    deadline = loop.time() + timeout
    while not await asyncio.to_thread(predicate):
        if loop.time() > deadline:
            return False
        await asyncio.sleep(0.05)
    return True


def _event(alarm: str, kind: str, n: int) -> AlarmEvent:
    return AlarmEvent(
        alarm=alarm,
        kind=kind,
        time=time.time(),
        priority="critical",
        message=f"Feedwater tank level low ({kind})",
        state="unack_alarm" if kind == "raised" else "normal",
        id=n,
        key=f"{SITE}/{n}",
    )


@pytest.fixture
def outbox(tmp_path):
    conn = sqlite3.connect(tmp_path / "state.sqlite")
    conn.execute("PRAGMA journal_mode=WAL")
    yield Outbox(conn, site=SITE)
    conn.close()


def _cfg(base: str) -> Channel:
    return Channel(name="cluster", alertmanager=base, group_window="0 s", backoff_max="500 ms")


@asynccontextmanager
async def _working(outbox: Outbox, channel: AlertmanagerChannel) -> AsyncIterator[None]:
    """A delivery worker for ``channel`` while the block runs; cancelled and awaited after."""
    task = asyncio.create_task(DeliveryWorker(outbox, channel).run())
    try:
        yield
    finally:
        await stop_task(task)


async def _delivered(outbox: Outbox) -> bool:
    loop = asyncio.get_running_loop()
    deadline = loop.time() + 10.0
    while outbox.pending("cluster"):
        if loop.time() > deadline:
            return False
        await asyncio.sleep(0.02)
    return True


async def test_raised_alarm_appears_with_labels(alertmanager, outbox):
    """A raised alarm shows in GET /api/v2/alerts with its labels and the advisory note."""
    cfg = _cfg(alertmanager)
    async with _working(outbox, AlertmanagerChannel(cfg)):
        outbox.enqueue([cfg], [_event("feed-tank-low", "raised", 1)])
        assert await _delivered(outbox)
        assert await _until(lambda: alerts(alertmanager, "feed-tank-low"), 5.0)
    (alert,) = alerts(alertmanager, "feed-tank-low")
    assert alert["labels"] == {
        "alertname": "feed-tank-low",
        "site": SITE,
        "priority": "critical",
        "severity": "critical",
    }
    assert alert["annotations"]["advisory"] == ADVISORY_NOTICE
    assert alert["annotations"]["event_key"] == f"{SITE}/1"
    assert alert["status"]["state"] in ("active", "unprocessed")


async def test_cleared_alarm_resolves(alertmanager, outbox):
    """A clear posts endsAt and the alert leaves the active list (and is not re-posted)."""
    cfg = _cfg(alertmanager)
    # refreshed every 0.3 s, the alert would stay forever: only the clear can end it
    channel = AlertmanagerChannel(cfg, refresh_interval=0.3)
    async with _working(outbox, channel):
        outbox.enqueue([cfg], [_event("drum-level-low", "raised", 1)])
        assert await _delivered(outbox)
        assert await _until(lambda: alerts(alertmanager, "drum-level-low"), 5.0)
        await asyncio.sleep(RESOLVE_TIMEOUT)  # outlives resolve_timeout thanks to refresh
        assert await asyncio.to_thread(alerts, alertmanager, "drum-level-low")
        outbox.enqueue([cfg], [_event("drum-level-low", "cleared", 2)])
        assert await _delivered(outbox)
        assert await _until(lambda: not alerts(alertmanager, "drum-level-low"), 5.0)
        await asyncio.sleep(0.6)  # two refresh intervals: the cleared alert stays gone
        assert not await asyncio.to_thread(alerts, alertmanager, "drum-level-low")
    assert channel.active == {}


async def test_restarted_worker_keeps_the_alert_alive(alertmanager, outbox):
    """After a restart the worker restores and re-posts the open alert past resolve_timeout."""
    cfg = _cfg(alertmanager)
    async with _working(outbox, AlertmanagerChannel(cfg)):
        outbox.enqueue([cfg], [_event("blowdown-stuck", "raised", 1)])
        assert await _delivered(outbox)
    channel = AlertmanagerChannel(cfg, refresh_interval=0.5)
    async with _working(outbox, channel):
        await asyncio.sleep(RESOLVE_TIMEOUT * 1.75)
        still = await asyncio.to_thread(alerts, alertmanager, "blowdown-stuck")
    assert list(channel.active) == ["blowdown-stuck"]
    assert len(still) == 1


async def test_unrefreshed_alert_expires(alertmanager, outbox):
    """Control: without re-posting, Alertmanager drops the alert after resolve_timeout."""
    cfg = _cfg(alertmanager)
    channel = AlertmanagerChannel(cfg, refresh_interval=3600.0)
    async with _working(outbox, channel):
        outbox.enqueue([cfg], [_event("stack-temp-high", "raised", 1)])
        assert await _delivered(outbox)
        assert await _until(lambda: alerts(alertmanager, "stack-temp-high"), 5.0)
        assert await _until(lambda: not alerts(alertmanager, "stack-temp-high"), 6.0)


async def test_refresh_with_the_engine_list_resolves_the_rest(alertmanager, outbox):
    """refresh(active) keeps the listed alarms open and resolves the others at once."""
    cfg = _cfg(alertmanager)
    channel = AlertmanagerChannel(cfg)
    keep, drop = _event("burner-trip", "raised", 1), _event("feed-pump-fault", "raised", 2)
    async with _working(outbox, channel):
        outbox.enqueue([cfg], [keep, drop])
        assert await _delivered(outbox)
        assert await _until(lambda: alerts(alertmanager, "feed-pump-fault"), 5.0)
        await channel.refresh([keep])
        assert await _until(lambda: not alerts(alertmanager, "feed-pump-fault"), 1.5)
        assert alerts(alertmanager, "burner-trip")
