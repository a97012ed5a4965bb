"""Read-only by construction: a recording server sees only function codes 3 and 4 during a
full run (faults, reconnects, commissioning probes included), and the package source holds
no call of a Modbus write function."""

from __future__ import annotations

import asyncio
import re
from pathlib import Path

import pytest
from pymodbus.client.mixin import ModbusClientMixin

import edge
from edge.cli import main
from edge.config import ModbusTcpSource
from edge.model import Sample
from edge.sources.modbus import ModbusSource
from tests.support import stop_task, until

from .modbus_server import encode, modbus_server

# Named in the brief, and every write method pymodbus' client offers today.
WRITE_CALLS = {
    "write_register",
    "write_registers",
    "write_coil",
    "write_coils",
    "mask_write",
    "readwrite_registers",
} | {name for name in dir(ModbusClientMixin) if "write" in name.lower()}


@pytest.mark.asyncio
async def test_recording_server_sees_only_reads():
    """A full run with faults, a reconnect and probes sends function codes 3 and 4 only."""
    devices = {
        1: {"holding": {a: a for a in range(20) if a != 7}, "input": {0: 1, 1: 2}},
        2: {"holding": dict(enumerate(encode(2.5, "float32")))},
    }
    tags = [
        {"name": f"h{a}", "table": "holding", "address": a, "unit": "m"}
        for a in (0, 4, 7, 12, 19)  # 7 does not exist: exception 02, bisection
    ] + [
        {"name": "in0", "table": "input", "address": 0, "type": "int32", "unit": "m"},
        {"name": "u2", "table": "holding", "address": 0, "type": "float32", "unit": "m",
         "unit_id": 2},
    ]  # fmt: skip
    async with modbus_server(devices=devices) as server:
        server.fail_on("input", 1, 0x04)  # a device failure on one block
        config = ModbusTcpSource(
            name="boiler-plc",
            protocol="modbus-tcp",
            host="127.0.0.1",
            port=server.port,
            interval="50 ms",
            timeout="200 ms",
            backoff_max="500 ms",
            tags=tags,
        )
        source = ModbusSource(config)
        batches: list[list[Sample]] = []
        task = asyncio.create_task(source.run(batches.append))
        try:
            await until(lambda: len(batches) >= 5)
            await server.stop()
            await asyncio.sleep(0.2)
            await server.start()
            server.clear_faults()
            restarted = len(batches)
            await until(lambda: len(batches) > restarted and batches[-1][-1].quality.good)
        finally:
            await stop_task(task)
        for table in ("holding", "input"):
            argv = ["probe", server.url, "--table", table, "--address", "0", "--count", "2"]
            assert await asyncio.to_thread(main, [*argv, "--expect", "1"]) == 0
        codes = server.function_codes()
        count = len(server.requests)
    assert codes == {3, 4}
    assert count > 10  # five cycles of several blocks, the bisection, a reconnect, probes


@pytest.mark.asyncio
async def test_recording_server_would_see_a_write():
    """The recorder is no blind spot: a write request (function code 6), sent as raw bytes
    by the test, shows up in its record. So {3, 4} above means no write was sent."""
    # Modbus TCP frame (Modbus Messaging on TCP/IP v1.0b): transaction 7, protocol 0,
    # length 6, unit 1; PDU: function 6 (write single register), address 0, value 42.
    frame = bytes([0, 7, 0, 0, 0, 6, 1, 6, 0, 0, 0, 42])
    async with modbus_server(holding={0: 1}) as server:
        reader, writer = await asyncio.open_connection("127.0.0.1", server.port)
        writer.write(frame)
        await writer.drain()
        answer = await asyncio.wait_for(reader.readexactly(12), 5)  # the echo of the request
        writer.close()
        await writer.wait_closed()
        codes = server.function_codes()
    assert answer[7] == 6
    assert codes == {6}


def test_package_source_has_no_modbus_write_call():
    """No file of the edge package names a Modbus write function."""
    pattern = re.compile(r"\b(" + "|".join(sorted(WRITE_CALLS)) + r")\w*")
    root = Path(edge.__file__).parent
    found = [
        f"{path.relative_to(root)}:{n}: {line.strip()}"
        for path in sorted(root.rglob("*.py"))
        for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
        if pattern.search(line)
    ]
    assert found == []
    assert len(list(root.rglob("*.py"))) > 10  # the walk did see the package
