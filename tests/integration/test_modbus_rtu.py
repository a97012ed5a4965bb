"""Modbus RTU: a pymodbus serial server and our source on the two ends of a pty pair made
by socat, with two unit ids on one line."""

from __future__ import annotations

import asyncio
import subprocess
import time
from collections.abc import Iterator
from pathlib import Path

import pytest

from edge.cli import main
from edge.config import ModbusRtuSource
from edge.sources.modbus import ModbusSource

from .modbus_server import encode, modbus_server

pytestmark = pytest.mark.slow  # starts processes


@pytest.fixture
def pty_pair(tmp_path: Path) -> Iterator[tuple[str, str]]:
    """Two linked pseudo-terminals (server end, client end); socat must be installed."""
    server_end, client_end = tmp_path / "plc", tmp_path / "monitor"
    proc = subprocess.Popen(
        [
            "socat",
            f"pty,raw,echo=0,link={server_end}",
            f"pty,raw,echo=0,link={client_end}",
        ],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.DEVNULL,
    )
    try:
        deadline = time.monotonic() + 5
        while not (server_end.exists() and client_end.exists()):
            assert proc.poll() is None, "socat exited"
            assert time.monotonic() < deadline, "socat made no pty pair within 5 s"
            time.sleep(0.02)
        yield str(server_end), str(client_end)
    finally:
        proc.terminate()
        proc.wait(5)


@pytest.mark.asyncio
async def test_rtu_two_units_on_one_line(pty_pair):
    """Two unit ids on one RTU line are read with the RTU framer over a serial port."""
    server_end, client_end = pty_pair
    devices = {
        1: {"holding": dict(enumerate(encode(123456.0, "float32")))},  # 0x47F12000, IEEE 754
        2: {"input": {4: 0xFFFE}},  # int16 -2 (two's complement)
    }
    async with modbus_server(devices=devices, serial_port=server_end) as server:
        config = ModbusRtuSource(
            name="feed-line",
            protocol="modbus-rtu",
            device=client_end,
            baudrate=19200,
            parity="N",  # a pty refuses even parity; the framing is the same
            stopbits=1,
            unit_id=1,
            interval="200 ms",
            timeout="500 ms",
            tags=[
                {"name": "flow", "table": "holding", "address": 0, "type": "float32",
                 "unit": "m"},
                {"name": "level", "table": "input", "address": 4, "type": "int16",
                 "unit": "m", "unit_id": 2},
            ],
        )  # fmt: skip
        source = ModbusSource(config)
        samples = {}
        deadline = time.monotonic() + 5
        while time.monotonic() < deadline:  # the serial server may need a moment to open
            samples = {s.tag: s for s in await source.read_once()}
            if all(s.quality.good for s in samples.values()):
                break
            await asyncio.sleep(0.1)
        await source.close()
        units = {(r.unit, r.function_code) for r in server.requests}
    assert samples["flow"].value == 123456.0
    assert samples["level"].value == -2.0
    assert units == {(1, 3), (2, 4)}


@pytest.mark.asyncio
async def test_probe_over_rtu(pty_pair, capsys):
    """steam-edge probe reads an RTU unit given as a modbus-rtu:// URL with line settings."""
    server_end, client_end = pty_pair
    devices = {3: {"holding": dict(enumerate(encode(123456.0, "float32")))}}  # 0x47F12000
    async with modbus_server(devices=devices, serial_port=server_end) as server:
        url = f"modbus-rtu://{client_end}?baudrate=19200&parity=N&stopbits=1&bytesize=8"
        argv = ["probe", url, "--unit", "3", "--count", "2", "--expect", "123456"]
        rc = 1
        deadline = time.monotonic() + 5
        while rc != 0 and time.monotonic() < deadline:  # the serial server may need a moment
            rc = await asyncio.to_thread(main, argv)
        codes = server.function_codes()
    out = capsys.readouterr().out
    assert rc == 0
    assert "0x47F1" in out and "123456  address: 0, type: float32, word_order: big" in out
    assert codes == {3}
