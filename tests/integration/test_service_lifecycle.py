"""`steam-edge run` as a subprocess: SIGTERM, SIGHUP reload, and sd_notify/watchdog through a
Unix datagram socket the test reads."""

from __future__ import annotations

import asyncio
import itertools
import signal
import socket
import time

import pytest

from edge.alarms.journal import Journal
from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    ServiceProcess,
    get_json,
    registers,
    wait_for,
    write_config,
)

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

ALARM = "drum-superheat-low"
HP_ALARM = """\
  - name: hp-superheat-low
    signal: hp_header.superheat
    low: 20 K
    priority: high
"""


async def _alarm_states(url: str) -> dict[str, dict]:
    _, body = await get_json(url + "/api/v1/alarms")
    return {a["name"]: a for a in body["alarms"]}


async def _standing(url: str) -> dict[str, dict]:
    async def check():
        states = await _alarm_states(url)
        return states if states[ALARM]["state"] == "unacknowledged" else None

    return await wait_for(check, timeout=30.0, step=0.2)


async def test_sigterm_exits_0_within_5_s_and_flushes_journal(tmp_path):
    """SIGTERM: exit status 0 within 5 s; the raised alarm is in the journal afterwards."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        service = ServiceProcess(config)
        url = await asyncio.to_thread(lambda: service.url)
        await _standing(url)
        t0 = time.monotonic()
        service.signal(signal.SIGTERM)
        code = await asyncio.to_thread(service.proc.wait, 10)
        elapsed = time.monotonic() - t0
        service.stop()
    assert code == 0
    assert elapsed < 5.0
    assert service.event("stopped") is not None
    journal = Journal.open(str(tmp_path / "state.sqlite"), site="riverside-laundry")
    try:
        assert any(e.alarm == ALARM and e.kind == "raised" for e in journal.events(0, 1000))
        assert journal.load_states()[ALARM].state == "unacknowledged"
    finally:
        journal.close()


async def test_sighup_valid_config_swaps_alarms_and_keeps_state(tmp_path):
    """SIGHUP with a valid new config adds an alarm; the standing one keeps its state."""
    async with modbus_server(holding=registers(drum_c=180.0, hp_c=260.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        service = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: service.url)
            before = (await _standing(url))[ALARM]
            write_config(config, plc.port, extra_alarm=HP_ALARM)
            service.signal(signal.SIGHUP)
            await asyncio.to_thread(service.wait_event, "reloaded")

            async def added():
                states = await _alarm_states(url)
                return states if "hp-superheat-low" in states else None

            after = await wait_for(added, timeout=10.0)
            assert after[ALARM]["state"] == "unacknowledged"
            assert after[ALARM]["since"] == before["since"]
            # 4 MPa -> Tsat about 250.4 degC; 260 degC is below the 20 K limit
            await wait_for(lambda: _hp_raised(url), timeout=10.0)
        finally:
            assert await asyncio.to_thread(service.stop) == 0


async def _hp_raised(url: str) -> bool:
    return (await _alarm_states(url))["hp-superheat-low"]["active"]


async def test_sighup_invalid_config_is_rejected_and_old_keeps_running(tmp_path):
    """SIGHUP with an invalid config logs every problem; the running config stays."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        service = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: service.url)
            await _standing(url)
            good = config.read_text()
            config.write_text(good.replace("priority: critical", "priority: urgent"))
            service.signal(signal.SIGHUP)
            rejected = await asyncio.to_thread(service.wait_event, "reload_rejected")
            assert "priority" in rejected["problem"] and "edge.yaml" in rejected["problem"]
            assert service.proc.poll() is None
            states = await _alarm_states(url)
            assert states[ALARM]["priority"] == "critical"
            assert (await get_json(url + "/healthz"))[0] == 200
        finally:
            assert await asyncio.to_thread(service.stop) == 0


async def test_sd_notify_ready_then_watchdog_at_half_the_timeout(tmp_path):
    """With NOTIFY_SOCKET and WATCHDOG_USEC=1 s: READY=1 first, then WATCHDOG=1 about every
    0.5 s from the evaluation loop, STATUS= once the source is up, STOPPING=1 on SIGTERM."""
    sock = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
    path = str(tmp_path / "notify.sock")
    sock.bind(path)
    sock.setblocking(False)
    got: list[tuple[float, str]] = []

    async def read_until(pred, timeout: float) -> None:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            try:
                got.append((time.monotonic(), sock.recv(4096).decode()))
                if pred():
                    return
            except BlockingIOError:
                await asyncio.sleep(0.01)
        tail = "\n".join(service.lines[-15:] + service.stderr[-15:])
        raise AssertionError(f"not seen within {timeout} s: {got}\n{tail}")

    def pings() -> list[float]:
        return [t for t, m in got if m == "WATCHDOG=1"]

    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        env = {"NOTIFY_SOCKET": path, "WATCHDOG_USEC": "1000000"}
        service = ServiceProcess(config, env)
        try:
            await read_until(lambda: any("READY=1" in m for _, m in got), 60.0)
            await read_until(lambda: len(pings()) >= 7, 10.0)
            service.signal(signal.SIGTERM)
            await read_until(lambda: "STOPPING=1" in got[-1][1], 10.0)
            assert await asyncio.to_thread(service.proc.wait, 10) == 0
        finally:
            assert await asyncio.to_thread(service.stop) == 0
            sock.close()
    ready_at = next(t for t, m in got if "READY=1" in m)
    ticks = pings()[-6:]
    gaps = [b - a for a, b in itertools.pairwise(ticks)]
    assert all(t > ready_at for t in ticks)
    # systemd asks for a ping within WATCHDOG_USEC; we aim at half of it
    assert 0.3 < sorted(gaps)[len(gaps) // 2] < 0.75, gaps
    assert max(gaps) < 1.0, gaps
    assert any("STATUS=advisory only; 1/1 sources up" in m for _, m in got)
