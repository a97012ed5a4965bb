"""Modbus replies are matched to their request (issue 10, items 2 and 3): a reply with
another transaction id, unit id, function code or byte count is a protocol error counted
by kind, and its block is bad; one block's registers are never exported as another's.
Against a real TCP server that misbehaves on purpose (``rogue_modbus``)."""

from __future__ import annotations

import asyncio
import contextlib
import math

import pytest

from edge.config import ModbusTcpSource
from edge.model import OUT_OF_RANGE, Level, Sample
from edge.sources.modbus import ModbusSource
from tests.integration.rogue_modbus import rogue_server
from tests.registers import encode
from tests.support import stop_task

pytestmark = pytest.mark.asyncio

# two blocks far apart (never bridged into one read), each with its own value, in metres
# (a unit without physical bounds, so only the protocol decides)
A_VALUE, B_VALUE = 11.0, 22.0
REGS = {
    **dict(enumerate(encode(A_VALUE, "float32"))),
    **{500 + i: r for i, r in enumerate(encode(B_VALUE, "float32"))},
}


def source(port: int, tags: list[dict] | None = None) -> ModbusSource:
    return ModbusSource(
        ModbusTcpSource(
            name="boiler-plc",
            protocol="modbus-tcp",
            host="127.0.0.1",
            port=port,
            interval="50 ms",
            timeout="200 ms",
            retries=0,
            backoff_max="100 ms",
            tags=tags
            or [
                {"name": "a", "table": "holding", "address": 0, "type": "float32", "unit": "m"},
                {"name": "b", "table": "holding", "address": 500, "type": "float32", "unit": "m"},
            ],
        )
    )


async def _run(port: int, seconds: float = 1.0) -> tuple[list[list[Sample]], ModbusSource]:
    src = source(port)
    batches: list[list[Sample]] = []
    task = asyncio.create_task(src.run(batches.append))
    try:
        await asyncio.sleep(seconds)
    finally:
        await stop_task(task)
        await src.close()
    return batches, src


def _good_values(batches: list[list[Sample]]) -> set[tuple[str, float]]:
    return {(s.tag, s.value) for b in batches for s in b if s.quality.good}


async def test_honest_server_gives_each_block_its_own_value():
    """Control: a correct server gives a = 11 and b = 22, good, and no protocol errors."""
    async with rogue_server(REGS, "honest") as plc:
        batches, src = await _run(plc.port, 0.5)
    assert _good_values(batches) == {("a", A_VALUE), ("b", B_VALUE)}
    assert not src.health.errors


@pytest.mark.parametrize(
    ("mode", "kind"),
    [
        ("tid0", "transaction_id"),
        ("tid0_repeat", "transaction_id"),
        ("wrong_fc", "function_code"),
        ("wrong_unit", None),  # pymodbus drops it; we then see no answer at all
        ("short", "byte_count"),
    ],
)
async def test_a_reply_that_does_not_match_is_never_good(mode: str, kind: str | None):
    """Each kind of mismatched reply: no sample is ever good, every block is bad, and the
    mismatch is counted under its own kind."""
    async with rogue_server(REGS, mode) as plc:
        batches, src = await _run(plc.port, 1.0)
        assert len(plc.requests) >= 2
    assert batches and _good_values(batches) == set()
    assert all(s.quality.level is Level.BAD for b in batches for s in b)
    if kind is not None:
        assert src.health.errors.get(kind, 0) >= 1, src.health.errors
    reasons = {s.quality.reason for b in batches for s in b}
    assert reasons <= {"protocol_error", "comm_loss"}, reasons


async def test_a_repeated_frame_with_right_ids_is_ignored_not_misread():
    """A gateway sending each reply twice with correct ids: the stray copy never becomes
    the next block's answer; a and b keep their own values."""
    async with rogue_server(REGS, "repeat") as plc:
        batches, _ = await _run(plc.port, 1.0)
    assert _good_values(batches) == {("a", A_VALUE), ("b", B_VALUE)}


async def test_a_reply_that_arrives_a_byte_at_a_time_is_read_whole():
    """TCP may cut a reply anywhere: a reply written one byte at a time is still one
    answer, with each block's own value."""
    async with rogue_server(REGS, "trickle") as plc:
        src = source(plc.port)
        try:
            samples = await src.read_once()
        finally:
            await src.close()
    assert {(s.tag, s.value) for s in samples if s.quality.good} == {
        ("a", A_VALUE),
        ("b", B_VALUE),
    }


async def test_a_frame_that_is_not_modbus_tcp_drops_the_link():
    """A header whose protocol id is not 0 (MBAP, Modbus Messaging on TCP/IP
    Implementation Guide v1.0b, 3.1.3): protocol_error, counted, the link reopened."""
    async with rogue_server(REGS, "bad_protocol") as plc:
        batches, src = await _run(plc.port, 0.6)
        assert len(plc.requests) >= 2
    assert _good_values(batches) == set()
    assert src.health.errors.get("protocol", 0) >= 1, src.health.errors
    assert {s.quality.reason for b in batches for s in b} <= {"protocol_error", "comm_loss"}


async def test_an_exception_reply_names_its_code():
    """Exception 02 (Modbus Application Protocol v1.1b3, section 7: illegal data address)
    makes the block bad with that reason; the link stays up."""
    async with rogue_server(REGS, "exception") as plc:
        src = source(plc.port, [REGS_TAG_A])
        try:
            (sample,) = await src.read_once()
            connected = src._link.connected
        finally:
            await src.close()
    assert sample.quality.reason == "illegal_data_address"
    assert connected


REGS_TAG_A = {"name": "a", "table": "holding", "address": 0, "type": "float32", "unit": "m"}


@pytest.mark.parametrize(
    ("words", "unit", "type_"),
    [
        (encode(3.4028234663852886e38, "float32"), "bar", "float32"),  # float32 max
        ([0xFFFF, 0xFFFF], "kPa", "uint32"),  # uint32 max
        ([0x7FFF], "degC", "int16"),  # int16 max
        ([0x8000], "degC", "int16"),  # int16 min
    ],
)
async def test_plc_sentinel_values_over_the_wire_are_bad_out_of_range(words, unit, type_):
    """Sentinels a PLC puts in a register it cannot fill, read from a real server, are bad
    out_of_range, never a good pressure or temperature."""
    tag = {"name": "x", "table": "holding", "address": 0, "type": type_, "unit": unit}
    if unit in ("bar", "kPa"):
        tag["reference"] = "absolute"
    async with rogue_server(dict(enumerate(words)), "honest") as plc:
        src = source(plc.port, [tag])
        try:
            (sample,) = await src.read_once()
        finally:
            await src.close()
    assert math.isnan(sample.value) and sample.quality.reason == OUT_OF_RANGE


@pytest.mark.slow
async def test_stray_frames_are_skipped_and_counted_not_logged(tmp_path):
    """A real ``steam-edge run`` polling a gateway that sends the previous reply again before
    each answer: every stray frame is skipped (the values stay good) and counted in
    steamedge_guard_events_total{component="modbus",kind="stray_frame"}; none of them
    writes a log line, and nothing prints a traceback."""
    from tests.integration.servicekit import (
        ServiceProcess,
        metric,
        metrics_text,
        registers,
        wait_for,
        write_config,
    )

    async with rogue_server(registers(), "stale_repeat") as plc:
        service = ServiceProcess(write_config(tmp_path / "edge.yaml", plc.port))
        try:
            url = await asyncio.to_thread(lambda: service.url)

            async def counted() -> float | None:
                text = await metrics_text(url)
                n = metric(
                    text, "steamedge_guard_events_total", component="modbus", kind="stray_frame"
                )
                good = metric(text, "steamedge_point_quality", point="drum") == 2
                return n if n is not None and n >= 12 and good else None

            total = await wait_for(counted, timeout=20.0, step=0.3)
        finally:
            service.stop()
    assert total is not None and total >= 12
    assert not [line for line in service.lines if "stray" in line or "pymodbus" in line]
    assert not [line for line in service.lines + service.stderr if "Traceback" in line]


async def test_a_cancelled_read_leaves_the_link_usable():
    """A read cancelled while it waits (a probe's deadline, a stop) does not leave the
    link believing a request is still in flight: the next read goes on the wire and
    times out as a read, and the late reply of the cancelled one would be a stray."""
    from edge.sources.modbus_tcp import TcpLink

    requests = 0

    async def silent(reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        nonlocal requests
        with contextlib.suppress(ConnectionError, asyncio.IncompleteReadError):
            while True:
                await reader.readexactly(12)  # a read request (MBAP 7 + PDU 5), never answered
                requests += 1

    server = await asyncio.start_server(silent, "127.0.0.1", 0)
    port = server.sockets[0].getsockname()[1]
    link = TcpLink(source(port).config)
    try:
        assert await link.connect() is None
        task = asyncio.create_task(link.read("holding", 1, 0, 2))
        await asyncio.sleep(0.05)
        task.cancel()
        with contextlib.suppress(asyncio.CancelledError):
            await task
        failure = await link.read("holding", 1, 0, 2)
    finally:
        link.close()
        server.close()
        await server.wait_closed()
    assert failure.kind == "timeout", failure
    assert requests == 2
