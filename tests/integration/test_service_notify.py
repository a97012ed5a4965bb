"""Alarm events travel journal -> outbox -> webhook in the running monitor, and the backlog
shows on /metrics while the receiver is down."""

from __future__ import annotations

import pytest

from tests.integration.modbus_server import modbus_server
from tests.integration.notify_receiver import Receiver
from tests.integration.servicekit import (
    TOKEN,
    metric,
    metrics_text,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio

SECRET = "hook-secret-for-tests"  # invented


def _with_webhook(config, url: str) -> None:
    channel = (
        "notify:\n"
        f"  - {{name: oncall, webhook: '{url}', secret_env: STEAMEDGE_TEST_HOOK,"
        " group_window: 100 ms, backoff_max: 1 s}\n"
    )
    config.write_text(config.read_text().replace("http:", channel + "http:", 1))


async def test_raised_alarm_reaches_the_webhook_with_its_journal_key(tmp_path, monkeypatch):
    """The raise is journalled, queued and delivered; the receiver sees site/<journal id>."""
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", TOKEN)
    monkeypatch.setenv("STEAMEDGE_TEST_HOOK", SECRET)
    receiver = Receiver(SECRET)
    await receiver.start()
    try:
        async with modbus_server(holding=registers(drum_c=180.0)) as plc:
            config = write_config(tmp_path / "edge.yaml", plc.port)
            _with_webhook(config, receiver.url)
            async with running_monitor(config) as m:
                await wait_for(lambda: receiver.accepted, timeout=15.0)
                raised = next(e for e in m.events(0, 1000) if e.kind == "raised")
                assert f"riverside-laundry/{raised.id}" in receiver.accepted
                await wait_for(lambda: m.outbox.pending_counts(["oncall"])["oncall"] == 0)
                text = await metrics_text(m.url)
                assert metric(text, "steamedge_notifications_pending", channel="oncall") == 0
                assert metric(text, "steamedge_notifications_delivered_total", channel="oncall")
    finally:
        await receiver.stop()
    assert receiver.bad_signatures == 0


async def test_backlog_shows_while_the_receiver_is_down(tmp_path, monkeypatch):
    """With the receiver refusing connections, the queued event counts as pending and the
    failed attempts are counted; nothing is dropped."""
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", TOKEN)
    monkeypatch.setenv("STEAMEDGE_TEST_HOOK", SECRET)
    receiver = Receiver(SECRET)  # bound, not listening: connections are refused
    try:
        async with modbus_server(holding=registers(drum_c=180.0)) as plc:
            config = write_config(tmp_path / "edge.yaml", plc.port)
            _with_webhook(config, receiver.url)
            async with running_monitor(config) as m:

                async def failing() -> str | None:
                    text = await metrics_text(m.url)
                    failures = metric(
                        text, "steamedge_notification_failures_total", channel="oncall"
                    )
                    return text if failures else None

                text = await wait_for(failing, timeout=15.0)
                assert metric(text, "steamedge_notifications_pending", channel="oncall") >= 1
    finally:
        await receiver.stop()
