"""Poll-cycle cost of the Modbus source against two baselines, in one run.

    python tests/bench/modbus.py [--rounds 40]

A pymodbus TCP server in a separate process serves 1,400 holding registers; the device
carries 200 float32 and 600 int16 tags (1,000 registers) in groups with small gaps. Three
figures, all against the same server in the same run:

- source:   one ModbusSource.read_once() (plan, read, decode, condition, Samples);
- bare:     the same fewest block reads issued directly with pymodbus, nothing decoded;
- per tag:  one request per tag, nothing decoded.

Goal: source <= 1.5 x bare and >= 30 x faster than one request per tag.
"""

from __future__ import annotations

import argparse
import asyncio
import multiprocessing as mp
import statistics
import sys
import time
from multiprocessing.connection import Connection
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from pymodbus.client import AsyncModbusTcpClient

from edge.config import ModbusTcpSource
from edge.model import Level
from edge.sources.modbus import ModbusSource
from tests.integration.modbus_server import encode, modbus_server

GROUPS = 200  # each: one float32, three int16, then a gap of two registers
GROUP_WIDTH = 7


def layout() -> tuple[dict[int, int], list[dict[str, object]]]:
    registers: dict[int, int] = {}
    tags: list[dict[str, object]] = []
    for g in range(GROUPS):
        base = g * GROUP_WIDTH
        for i, reg in enumerate(encode(100.0 + g * 0.5, "float32")):
            registers[base + i] = reg
        tags.append(
            {"name": f"p{g}", "table": "holding", "address": base, "type": "float32",
             "unit": "bar", "reference": "gauge"}
        )  # fmt: skip
        for j in range(3):
            registers[base + 2 + j] = 1000 + g + j
            tags.append(
                {"name": f"t{g}_{j}", "table": "holding", "address": base + 2 + j,
                 "type": "int16", "unit": "degC", "scale": [0, 10000, 0, 1000]}
            )  # fmt: skip
        registers[base + 5] = 0  # the gap registers exist, as on most PLCs
        registers[base + 6] = 0
    return registers, tags


def serve(conn: Connection) -> None:
    """Server process: serve the layout until told to stop."""

    async def main() -> None:
        registers, _ = layout()
        async with modbus_server(holding=registers) as server:
            conn.send(server.port)
            loop = asyncio.get_running_loop()
            await loop.run_in_executor(None, conn.recv)

    asyncio.run(main())


async def timed(rounds: int, fn) -> list[float]:  # type: ignore[no-untyped-def]
    out = []
    for _ in range(rounds):
        t = time.perf_counter()
        await fn()
        out.append(time.perf_counter() - t)
    return out


async def bench(port: int, rounds: int) -> None:
    _, tags = layout()
    config = ModbusTcpSource(
        name="bench", protocol="modbus-tcp", host="127.0.0.1", port=port,
        timeout="2 s", interval="1 s", tags=tags,
    )  # fmt: skip
    source = ModbusSource(config)
    samples = await source.read_once()
    good = sum(1 for s in samples if s.quality.level is Level.GOOD)
    assert good == len(tags) == 800, f"only {good} good samples"
    reads = source.reads
    client = AsyncModbusTcpClient("127.0.0.1", port=port, timeout=2, reconnect_delay=0)
    await client.connect()

    async def bare() -> None:
        for r in reads:
            response = await client.read_holding_registers(r.start, count=r.count, device_id=1)
            assert not response.isError()

    spans = [s for r in reads for s in r.spans]

    async def per_tag() -> None:
        for s in spans:
            response = await client.read_holding_registers(s.address, count=s.count, device_id=1)
            assert not response.isError()

    ours: list[float] = []
    base: list[float] = []
    slow: list[float] = []
    for i in range(rounds):  # interleaved, so load on the machine hits all three alike
        ours += await timed(1, source.read_once)
        base += await timed(1, bare)
        if i % 8 == 0:
            slow += await timed(1, per_tag)
    client.close()
    await source.close()

    registers = sum(s.count for s in spans)
    m_ours, m_base, m_slow = (statistics.median(x) for x in (ours, base, slow))
    print(f"tags: {len(spans)} ({registers} registers) in {len(reads)} block reads")
    print(f"source cycle      median {m_ours * 1e3:8.2f} ms   (min {min(ours) * 1e3:.2f})")
    print(f"bare block reads  median {m_base * 1e3:8.2f} ms   (min {min(base) * 1e3:.2f})")
    print(f"one tag/request   median {m_slow * 1e3:8.2f} ms   (min {min(slow) * 1e3:.2f})")
    ratio_bare, ratio_slow = m_ours / m_base, m_slow / m_ours
    print(f"source / bare     {ratio_bare:6.2f} x   (goal <= 1.5)  {_verdict(ratio_bare <= 1.5)}")
    print(f"per tag / source  {ratio_slow:6.1f} x   (goal >= 30)   {_verdict(ratio_slow >= 30)}")


def _verdict(ok: bool) -> str:
    return "met" if ok else "NOT MET"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=40)
    args = parser.parse_args()
    parent, child = mp.Pipe()
    proc = mp.Process(target=serve, args=(child,), daemon=True)
    proc.start()
    try:
        if not parent.poll(20):
            raise SystemExit("bench server did not start")
        port = parent.recv()
        asyncio.run(bench(port, args.rounds))
    finally:
        parent.send("stop")
        proc.join(5)
        if proc.is_alive():
            proc.terminate()
            proc.join()


if __name__ == "__main__":
    main()
