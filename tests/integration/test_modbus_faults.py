"""ModbusSource under faults: a server that stops and comes back, one that never answers,
one that answers nonsense, a dead unit behind a gateway; and the reconnect backoff."""

from __future__ import annotations

import asyncio
import random
import time
from collections.abc import AsyncIterator, Callable
from contextlib import asynccontextmanager

import pytest
from prometheus_client.parser import text_string_to_metric_families

from edge.config import Config, ModbusTcpSource
from edge.evaluation import stale_limits
from edge.model import COMM_LOSS, STALE, Level, Sample
from edge.sources.modbus import BACKOFF_CAP, ModbusSource
from edge.store import TagStore
from edge.web.exposition import render
from edge.web.metrics import LiveView, families
from tests.support import stop_task

from .modbus_server import encode, garbage_server, modbus_server, silent_server

INTERVAL = 0.2
BACKOFF_MAX = 1.0


def config(port: int, tags: list[dict] | None = None, **kw: object) -> ModbusTcpSource:
    fields: dict[str, object] = {
        "name": "boiler-plc",
        "protocol": "modbus-tcp",
        "host": "127.0.0.1",
        "port": port,
        "interval": f"{INTERVAL} s",
        "timeout": "200 ms",
        "retries": 0,
        "backoff_max": f"{BACKOFF_MAX} s",
        "tags": tags
        or [
            {"name": "drum_p", "table": "holding", "address": 0, "type": "float32",
             "unit": "bar", "reference": "gauge"},
            {"name": "drum_t", "table": "holding", "address": 2, "type": "int16",
             "unit": "degC"},
        ],
    }  # fmt: skip
    return ModbusTcpSource(**(fields | kw))


REGISTERS = dict(enumerate([*encode(7.5, "float32"), 180]))


class Recorder:
    """The emit callback: keeps every batch with the monotonic time it arrived."""

    def __init__(self) -> None:
        self.batches: list[tuple[float, list[Sample]]] = []

    def __call__(self, samples: list[Sample]) -> None:
        self.batches.append((time.monotonic(), samples))

    def since(self, t: float) -> list[tuple[float, list[Sample]]]:
        return [(at, b) for at, b in self.batches if at >= t]

    def latest_good(self) -> bool:
        """A batch has arrived and every sample of the latest one is good."""
        return bool(self.batches) and all_good(self.batches[-1][1])


async def until(condition: Callable[[], bool], timeout: float) -> float:
    """Poll ``condition`` every 10 ms; the monotonic time it came true, or fail."""
    deadline = time.monotonic() + timeout
    while not condition():
        assert time.monotonic() < deadline, f"condition not met within {timeout} s"
        await asyncio.sleep(0.01)
    return time.monotonic()


def all_good(batch: list[Sample]) -> bool:
    return all(s.quality.good for s in batch)


def all_comm_loss(batch: list[Sample]) -> bool:
    return all(s.quality.level is Level.BAD and s.quality.reason == COMM_LOSS for s in batch)


def scrape(source: ModbusSource) -> dict[tuple[str, tuple[tuple[str, str], ...]], float]:
    """The source's series as /metrics exposes them: the service's own collector and
    exposition over ``source.health``, parsed back by prometheus_client."""
    view = LiveView("0", "riverside-laundry", {}, None, [], {source.name: source.health})
    text = render(families(view)).decode()
    return {
        (s.name, tuple(sorted(s.labels.items()))): s.value
        for family in text_string_to_metric_families(text)
        for s in family.samples
    }


@asynccontextmanager
async def running(source: ModbusSource) -> AsyncIterator[Recorder]:
    """The source's loop, emitting into a Recorder; cancelled and awaited on the way out."""
    rec = Recorder()
    task = asyncio.create_task(source.run(rec))
    try:
        yield rec
    finally:
        await stop_task(task)


@pytest.mark.asyncio
async def test_server_stopped_mid_run_is_comm_loss_within_two_intervals():
    """Stopping the server makes every tag bad/comm_loss within 2 intervals, and the
    exported steamedge_source_up goes from 1 to 0, with the failure counted by kind."""
    up = ("steamedge_source_up", (("source", "boiler-plc"),))
    async with modbus_server(holding=REGISTERS) as server:
        source = ModbusSource(config(server.port))
        async with running(source) as rec:
            await until(rec.latest_good, 3)
            assert scrape(source)[up] == 1.0
            stopped = time.monotonic()
            await server.stop()
            await until(lambda: any(all_comm_loss(b) for _, b in rec.since(stopped)), 3)
            first_bad = next(at for at, b in rec.since(stopped) if all_comm_loss(b))
            assert first_bad - stopped <= 2 * INTERVAL
            metrics = scrape(source)
            assert metrics[up] == 0.0
            errors = {
                dict(labels)["kind"]: value
                for (name, labels), value in metrics.items()
                if name == "steamedge_source_errors_total"
            }
            assert errors and sum(errors.values()) == sum(source.health.errors.values()) >= 1
            assert set(errors) <= {"connection", "timeout", "protocol", "connect"}
            # the last good values travel along as context only
            assert [s.last_good for s in rec.batches[-1][1]] == [7.5e5, 453.15]


@pytest.mark.asyncio
async def test_server_restart_resumes_without_stale_good_cycles():
    """After a restart readings resume within the backoff cap; no cycle in the outage is
    reported good, the first good value is the new one, and no cycle is emitted twice."""
    async with modbus_server(holding=REGISTERS) as server:
        source = ModbusSource(config(server.port))
        async with running(source) as rec:
            await until(rec.latest_good, 3)
            stopped = time.monotonic()
            await server.stop()
            await server.set_registers("holding", 0, encode(9.25, "float32"))
            await asyncio.sleep(4 * INTERVAL)  # let the backoff grow a little
            restarted = time.monotonic()
            await server.start()
            resumed = await until(rec.latest_good, BACKOFF_MAX + 3)
            assert resumed - restarted <= BACKOFF_MAX + INTERVAL + 0.3
    outage = [b for at, b in rec.batches if stopped + 0.05 < at < restarted]
    assert outage and all(not any(s.quality.good for s in b) for b in outage)
    after = [b for at, b in rec.batches if at >= restarted and all_good(b)]
    assert after[0][0].value == 9.25e5  # 9.25 bar gauge, read fresh after the restart
    times = [b[0].receive_time for _, b in rec.batches]
    assert times == sorted(times) and len(set(times)) == len(times)
    assert scrape(source)[("steamedge_source_up", (("source", "boiler-plc"),))] == 1.0


@pytest.mark.asyncio
async def test_server_that_never_answers_times_out():
    """A server that accepts and never answers gives timeouts, not a hung loop."""
    async with silent_server() as port:
        source = ModbusSource(config(port, retries=1))
        started = time.monotonic()
        samples = await asyncio.wait_for(source.read_once(), 5)
        elapsed = time.monotonic() - started
        assert elapsed < 0.2 * 2 + 0.5  # timeout x (retries + 1), plus slack
        assert all_comm_loss(samples)
        assert source.health.errors.get("timeout") == 1
        async with running(source) as rec:
            await until(lambda: len(rec.batches) >= 4, 5)  # the loop keeps emitting
    assert all(all_comm_loss(b) for _, b in rec.batches)
    assert source.health.up is False


@pytest.mark.asyncio
async def test_server_answering_garbage_is_bad_not_an_exception():
    """Bytes that are not Modbus give bad samples and a counted error, never an exception."""
    async with garbage_server() as port:
        source = ModbusSource(config(port))
        samples = await asyncio.wait_for(source.read_once(), 5)
        samples_again = await asyncio.wait_for(source.read_once(), 5)
    assert all(s.quality.level is Level.BAD for s in samples + samples_again)
    assert sum(source.health.errors.values()) >= 1
    assert "internal" not in source.health.errors


@pytest.mark.asyncio
async def test_dead_unit_costs_one_timeout_and_spares_the_others():
    """A unit that stops answering blanks only its tags; its other reads are skipped."""
    devices = {1: {"holding": {0: 11}}, 2: {"holding": {0: 21, 50: 22}}}
    tags = [
        {"name": "u1", "table": "holding", "address": 0, "unit": "m"},
        {"name": "u2a", "table": "holding", "address": 0, "unit": "m", "unit_id": 2},
        {"name": "u2b", "table": "holding", "address": 50, "unit": "m", "unit_id": 2},
    ]
    async with modbus_server(devices=devices) as server:
        source = ModbusSource(config(server.port, tags))
        assert all_good(await source.read_once())
        server.silent_units.add(2)
        server.requests.clear()
        samples = {s.tag: s for s in await source.read_once()}
        to_unit_2 = [r for r in server.requests if r.unit == 2]
        again = {s.tag: s for s in await source.read_once()}
        await source.close()
    assert samples["u1"].quality.good and again["u1"].quality.good
    assert samples["u2a"].quality.reason == COMM_LOSS
    assert samples["u2b"].quality.reason == COMM_LOSS
    assert len(to_unit_2) == 1
    assert source.health.up is True


@pytest.mark.asyncio
async def test_reconnect_attempts_are_spaced_by_backoff():
    """While nothing listens, connection attempts thin out instead of one per cycle."""
    async with modbus_server(holding=REGISTERS) as server:
        port = server.port
    source = ModbusSource(config(port, interval="20 ms", backoff_max="2 s"), rng=random.Random(1))
    async with running(source) as rec:
        await until(lambda: len(rec.batches) >= 60, 10)
    attempts = source.health.errors["connect"]
    assert all(all_comm_loss(b) for _, b in rec.batches)
    # delays of at least 0.25, 0.5, 1, 1 s (half of 0.5 s doubling, capped): about 1.2 s
    # of cycles hold at most 4 attempts
    assert 2 <= attempts <= 5 < len(rec.batches) / 10


def test_backoff_is_capped_at_30_seconds():
    """Whatever backoff_max says, no wait between Modbus reconnects exceeds 30 s (pymodbus'
    own default is 300 s): the source caps what it passes to the one backoff rule."""
    config = ModbusTcpSource(
        name="plc", protocol="modbus-tcp", host="127.0.0.1", backoff_max="300 s", tags=[]
    )
    source = ModbusSource(config, rng=random.Random(7))
    delays = [source._next_delay() for _ in range(40)]
    assert max(delays) <= BACKOFF_CAP == 30.0
    assert min(delays[20:]) >= 15.0


@pytest.mark.asyncio
async def test_tag_goes_stale_after_three_intervals():
    """A tag whose samples stop arriving is bad/stale after 3 intervals (the default)."""
    async with modbus_server(holding=REGISTERS) as server:
        source_config = config(server.port)
        full = Config(
            version=1,
            site="riverside-laundry",
            barometer={"fixed": "101.325 kPa"},
            sources=[source_config.model_dump(mode="json")],
        )
        limits = stale_limits(full)
        source = ModbusSource(source_config)
        store = TagStore(limits)
        store.update(await source.read_once())
        await source.close()
    received = store.get("drum_p").receive_time
    assert limits["drum_p"] == pytest.approx(3 * INTERVAL)
    assert store.snapshot(received + 2.9 * INTERVAL)["drum_p"].quality.good
    stale = store.snapshot(received + 3.1 * INTERVAL)["drum_p"]
    assert (stale.quality.level, stale.quality.reason, stale.last_good) == (
        Level.BAD,
        STALE,
        7.5e5,
    )


@pytest.mark.asyncio
async def test_pymodbus_own_reconnect_is_off():
    """The pymodbus client of an RTU line never reconnects by itself (its default cap is
    300 s); Modbus TCP has its own client (edge.sources.modbus_tcp), which never does."""
    from edge.config import ModbusRtuSource
    from edge.sources.modbus_link import _client

    rtu = ModbusRtuSource(
        name="feed-line",
        protocol="modbus-rtu",
        device="/dev/ttyUSB9",
        baudrate=19200,
        unit_id=1,
        interval="1 s",
        backoff_max="10 min",
        tags=[{"name": "f", "table": "holding", "address": 0, "type": "float32", "unit": "m"}],
    )
    params = _client(rtu).comm_params
    assert params.reconnect_delay == 0
    assert params.reconnect_delay_max <= BACKOFF_CAP


@pytest.mark.asyncio
async def test_tcp_link_reconnects_only_when_the_source_asks():
    """After the device closes the connection, the TCP link stays closed until the source
    calls connect again (its own capped backoff)."""
    async with modbus_server(holding=REGISTERS) as server:
        source = ModbusSource(config(server.port, backoff_max="10 min"))
        await source.read_once()
        link = source._link
        assert link.connected
        link.close()
        await asyncio.sleep(0.2)
        assert not link.connected
        await source.close()
