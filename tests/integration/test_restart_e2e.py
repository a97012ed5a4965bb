"""End to end: `steam-edge run` fed by a real Modbus server raises alarms while its webhook
receiver refuses connections, is killed with SIGKILL, and is started again on the same
SQLite file with the receiver up. States and unacknowledged flags come back, nothing is
announced twice as new, and every notification queued before the kill arrives after it."""

from __future__ import annotations

import asyncio
import signal
from typing import Any

import pytest

from tests.integration.modbus_server import modbus_server
from tests.integration.notify_receiver import Receiver
from tests.integration.servicekit import (
    TOKEN,
    ServiceProcess,
    auth,
    get_json,
    metric,
    metrics_text,
    post,
    registers,
    wait_for,
    write_config,
)

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

SECRET = "restart-hook-secret"  # invented
HOOK_ENV = {"STEAMEDGE_TEST_HOOK": SECRET}
DRUM, HP = "drum-superheat-low", "hp-superheat-low"
HP_ALARM = """\
  - name: hp-superheat-low
    signal: hp_header.superheat
    low: 20 K
    priority: high
"""
KEPT = ("state", "active", "unacknowledged", "since", "active_since", "priority", "user")


def _with_webhook(config: Any, url: str) -> None:
    channel = (
        "notify:\n"
        f"  - {{name: oncall, webhook: '{url}', secret_env: STEAMEDGE_TEST_HOOK,"
        " group_window: 100 ms, backoff_max: 1 s, timeout: 2 s}\n"
    )
    config.write_text(config.read_text().replace("http:", channel + "http:", 1))


async def _alarms(url: str) -> dict[str, dict[str, Any]]:
    _, body = await get_json(url + "/api/v1/alarms")
    return {a["name"]: a for a in body["alarms"]}


async def _events(url: str) -> list[dict[str, Any]]:
    _, body = await get_json(url + "/api/v1/events?limit=1000")
    return body["events"]


async def test_sigkill_restart_restores_states_and_delivers_the_queue(tmp_path):
    """Raise two alarms, acknowledge one, SIGKILL with the receiver down; restart on the same
    file with the receiver up: same states, no second 'raised', every queued event delivered."""
    receiver = Receiver(SECRET)  # port bound, not listening: connections are refused
    try:
        # drum: 0.2 K superheat (< 5 K); HP header: 4 MPa abs, 260 degC, 9.6 K (< 20 K)
        async with modbus_server(holding=registers(drum_c=180.0, hp_c=260.0)) as plc:
            config = write_config(tmp_path / "edge.yaml", plc.port, extra_alarm=HP_ALARM)
            _with_webhook(config, receiver.url)

            first = ServiceProcess(config, HOOK_ENV)
            try:
                url = await asyncio.to_thread(lambda: first.url)

                async def both_raised() -> dict[str, dict[str, Any]] | None:
                    alarms = await _alarms(url)
                    up = all(alarms[n]["state"] == "unacknowledged" for n in (DRUM, HP))
                    return alarms if up else None

                await wait_for(both_raised, timeout=20.0, step=0.1)
                status, body = await post(
                    f"{url}/api/v1/alarms/{HP}/ack",
                    {"user": "night-shift", "comment": "seen on the panel"},
                    auth(TOKEN),
                )
                assert status == 200 and [e["kind"] for e in body["events"]] == ["acknowledged"]
                before = await _alarms(url)
                queued = await _events(url)
                keys = {f"riverside-laundry/{e['id']}" for e in queued}

                async def all_pending() -> bool:
                    text = await metrics_text(url)
                    pending = metric(text, "steamedge_notifications_pending", channel="oncall")
                    return pending == len(queued) and first.event("notify_failed") is not None

                await wait_for(all_pending, timeout=10.0)  # queued, and the receiver refused
            finally:
                first.proc.send_signal(signal.SIGKILL)
                await asyncio.to_thread(first.stop)
            assert first.proc.returncode == -signal.SIGKILL
            assert first.event("stopped") is None  # no clean stop ran
            assert receiver.requests == 0

            await receiver.start()
            second = ServiceProcess(config, HOOK_ENV)
            try:
                url = await asyncio.to_thread(lambda: second.url)
                after = await _alarms(url)
                await wait_for(lambda: keys <= set(receiver.accepted), timeout=15.0)

                async def evaluated_with_data() -> bool:
                    _, body = await get_json(url + "/api/v1/points")
                    return all(p["quality"] == "good" for p in body["points"])

                await wait_for(evaluated_with_data, timeout=10.0)
                await asyncio.sleep(0.5)  # a few evaluation passes on good data
                settled = await _alarms(url)
                events = await _events(url)
            finally:
                assert await asyncio.to_thread(second.stop) == 0
    finally:
        await receiver.stop()

    assert {e["alarm"] for e in queued if e["kind"] == "raised"} == {DRUM, HP}
    for name in (DRUM, HP):
        assert {k: after[name][k] for k in KEPT} == {k: before[name][k] for k in KEPT}
        assert {k: settled[name][k] for k in KEPT} == {k: before[name][k] for k in KEPT}
    assert (settled[DRUM]["state"], settled[DRUM]["unacknowledged"]) == ("unacknowledged", True)
    assert (settled[HP]["state"], settled[HP]["unacknowledged"]) == ("acknowledged", False)
    assert settled[HP]["user"] == "night-shift"
    raised = [e["alarm"] for e in events if e["kind"] == "raised"]
    assert sorted(raised) == [DRUM, HP]  # each announced once, before the kill only
    assert events[: len(queued)] == queued  # the journal kept every event, unchanged
    assert keys <= set(receiver.accepted)  # every queued notification arrived after the kill
    assert receiver.bad_signatures == 0  # HMAC-SHA256 verified by the receiver
