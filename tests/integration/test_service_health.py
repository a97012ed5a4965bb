"""/healthz, /readyz and the watchdog of an in-process monitor: what each one watches, and
that each one turns when what it watches fails (a real Modbus server, a real SQLite file,
a real Unix datagram socket for sd_notify)."""

from __future__ import annotations

import asyncio
import socket
import time

import pytest

from edge.service.sdnotify import Notifier
from tests.integration.modbus_server import encode, modbus_server
from tests.integration.servicekit import (
    DRUM_T,
    get_json,
    metric,
    metrics_text,
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


async def test_readyz_turns_503_while_storage_refuses_writes_and_recovers(tmp_path):
    """A journal that cannot be written makes /readyz 503 (storage) and
    steamedge_storage_ok 0; once writable again the held event is written and it is 200."""
    # 9 barg + 97 kPa -> Tsat about 179.5 degC: 190 degC is 10.5 K superheat, 180 degC 0.5 K
    async with modbus_server(holding=registers(drum_c=190.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.readiness()["source"])
            assert (await get_json(m.url + "/readyz"))[0] == 200
            conn = m.journal.connection
            conn.execute("PRAGMA query_only = ON")  # every write now fails, as on a RO disk
            await plc.set_registers("holding", DRUM_T, encode(180.0, "float32"))
            await wait_for(lambda: not m.storage_ok)
            status, body = await get_json(m.url + "/readyz")
            assert status == 503 and body["checks"]["storage"] is False
            assert metric(await metrics_text(m.url), "steamedge_storage_ok") == 0
            assert m.alarm_states[ALARM].active  # the alarm still works from memory
            conn.execute("PRAGMA query_only = OFF")
            await wait_for(lambda: m.storage_ok, timeout=5.0)
            assert (await get_json(m.url + "/readyz"))[0] == 200
            assert any(e.alarm == ALARM and e.kind == "raised" for e in m.events(0, 1000))


async def test_a_dead_evaluation_loop_stops_the_watchdog_and_fails_healthz(tmp_path):
    """The watchdog ping comes only from the evaluation loop: once the loop is gone the
    pings stop and /healthz is 503, while HTTP itself still answers."""
    sock = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
    path = str(tmp_path / "notify.sock")
    sock.bind(path)
    sock.setblocking(False)

    def drain() -> list[str]:
        got = []
        while True:
            try:
                got.append(sock.recv(4096).decode())
            except BlockingIOError:
                return got

    notifier = Notifier(path, watchdog_usec=400_000)  # ping every 0.2 s
    try:
        async with modbus_server(holding=registers()) as plc:
            config = write_config(tmp_path / "edge.yaml", plc.port)
            async with running_monitor(config, notifier=notifier) as m:
                pings: list[str] = []
                await wait_for(
                    lambda: pings.extend(x for x in drain() if x == "WATCHDOG=1") or len(pings) > 2,
                    timeout=5.0,
                )
                assert (await get_json(m.url + "/healthz"))[0] == 200
                await m._loop.stop()  # the loop is gone, as if stuck or crashed
                drain()
                t0 = time.monotonic()
                await asyncio.sleep(0.8)  # four ping periods
                late = [x for x in drain() if x == "WATCHDOG=1"]
                assert late == [], f"pinged {len(late)} times in {time.monotonic() - t0:.2f} s"
                status, body = await get_json(m.url + "/healthz")
                assert status == 503 and body["error"] == "not_alive"
    finally:
        sock.close()
        notifier.close()


async def test_a_refused_start_stops_its_sources_promptly(tmp_path):
    """HTTP port taken: start() fails with the reason, within seconds, leaving no source task
    behind, even though the source was mid-connect when told to stop (pymodbus on Python
    3.11 swallows that cancellation; the stop must not wait forever for it)."""
    from edge.errors import ConfigError

    with socket.socket() as taken:
        taken.bind(("127.0.0.1", 0))
        taken.listen()
        port = taken.getsockname()[1]
        async with modbus_server(holding=registers()) as plc:
            config = write_config(tmp_path / "edge.yaml", plc.port, listen=f"127.0.0.1:{port}")
            t0 = time.monotonic()
            async with asyncio.timeout(10):
                with pytest.raises(ConfigError, match="cannot listen"):
                    async with running_monitor(config):
                        pass
            assert time.monotonic() - t0 < 3.0
    left = [t.get_name() for t in asyncio.all_tasks() if t.get_name().startswith("source:")]
    assert left == []
