"""A real pymodbus server on 127.0.0.1 for tests: given registers, changeable values,
stop/restart on the same port, and a record of every request it received.

    async with modbus_server(holding={0: 0x47F1, 1: 0x2000}) as server:
        server.port                     # the free port it bound
        await server.set_registers("holding", 0, encode(7.5, "float32"))
        await server.stop(); await server.start()   # same port, values kept
        server.fail_on("holding", 5, 0x04)  # reads touching register 5 get exception 04
        server.silent_units.add(2)          # unit 2 stops answering
        server.function_codes()         # {3} after reads of holding registers

Registers are given per table as ``{address: value}`` (16-bit values); addresses not given
do not exist, so a read touching one gets exception 02 (illegal data address). Several
unit ids: ``devices={1: {"holding": {...}}, 2: {"input": {...}}}``.

Also here: ``silent_server`` (accepts connections, never answers), ``garbage_server``
(answers every request with bytes that are not Modbus), and ``encode`` (a value -> its
registers in any layout, with ``struct``, independent of the code under test).
"""

from __future__ import annotations

import asyncio
import contextlib
import functools
from collections.abc import AsyncIterator, Iterable, Mapping
from dataclasses import dataclass, field

from pymodbus.constants import ExcCodes
from pymodbus.framer import FramerType
from pymodbus.pdu import ModbusPDU
from pymodbus.server import ModbusSerialServer, ModbusTcpServer
from pymodbus.simulator import DataType, SimData, SimDevice

from tests.registers import encode

__all__ = [
    "ModbusTestServer",
    "Request",
    "encode",
    "garbage_server",
    "modbus_server",
    "silent_server",
]

HOST = "127.0.0.1"
TABLE_FC = {"holding": 3, "input": 4}
FC_TABLE = {3: "holding", 4: "input"}
TableValues = Mapping[int, int]
DeviceValues = Mapping[str, TableValues]  # "holding" | "input" -> {address: value}


@dataclass(frozen=True, slots=True)
class Request:
    """One request PDU the server received."""

    function_code: int
    unit: int
    address: int | None
    count: int | None


def _runs(values: TableValues) -> list[SimData]:
    """Contiguous address runs as SimData blocks (gaps stay invalid addresses)."""
    blocks: list[SimData] = []
    run: list[int] = []
    start = -2
    for address in sorted(values):
        if run and address == start + len(run):
            run.append(values[address] & 0xFFFF)
            continue
        if run:
            blocks.append(SimData(start, values=run, datatype=DataType.REGISTERS))
        start, run = address, [values[address] & 0xFFFF]
    if run:
        blocks.append(SimData(start, values=run, datatype=DataType.REGISTERS))
    return blocks


def _device(unit: int, tables: DeviceValues, action: object) -> SimDevice:
    unknown = set(tables) - set(TABLE_FC)
    if unknown:
        raise ValueError(f"unknown table(s) {unknown}; use 'holding' or 'input'")
    # coils and discrete inputs are never read; one bit each keeps pymodbus content
    bits = [SimData(0, values=[False] * 16, datatype=DataType.BITS)]
    holding = _runs(tables.get("holding", {})) or [SimData(65000, count=1)]
    inputs = _runs(tables.get("input", {})) or [SimData(65000, count=1)]
    return SimDevice(unit, simdata=(bits, list(bits), holding, inputs), action=action)  # type: ignore[arg-type]


@dataclass
class ModbusTestServer:
    """A pymodbus TCP (or RTU-over-serial) server whose registers a test controls."""

    devices: dict[int, dict[str, dict[int, int]]]
    host: str = HOST
    port: int = 0
    serial_port: str | None = None  # set: serve RTU on this serial device (a pty)
    silent_units: set[int] = field(default_factory=set)  # units that never answer
    requests: list[Request] = field(default_factory=list)
    faults: dict[tuple[int, str, int], int] = field(default_factory=dict)
    _server: ModbusTcpServer | ModbusSerialServer | None = None

    async def start(self) -> None:
        """Start serving (on the port of a previous start, if there was one)."""
        if self._server is not None:
            return
        sims = [
            _device(unit, tables, functools.partial(self._action, unit))
            for unit, tables in sorted(self.devices.items())
        ]
        if self.serial_port is not None:
            self._server = ModbusSerialServer(
                sims,
                framer=FramerType.RTU,
                port=self.serial_port,
                trace_pdu=self._trace,
                trace_packet=self._packet,
            )
        else:
            self._server = ModbusTcpServer(
                sims,
                address=(self.host, self.port),
                trace_pdu=self._trace,
                trace_packet=self._packet,
            )
        for _ in range(50):  # a port just released may need a moment
            try:
                await self._server.serve_forever(background=True)
                break
            except RuntimeError:
                await asyncio.sleep(0.05)
        else:
            raise RuntimeError(f"modbus test server could not listen on {self.port}")
        if self.serial_port is None and self.port == 0:
            transport = self._server.transport
            self.port = transport.sockets[0].getsockname()[1]  # type: ignore[union-attr]

    async def stop(self) -> None:
        """Stop serving and drop every client connection."""
        if self._server is not None:
            await self._server.shutdown()
            self._server = None
            await asyncio.sleep(0)

    async def restart(self) -> None:
        await self.stop()
        await self.start()

    @property
    def running(self) -> bool:
        return self._server is not None

    @property
    def url(self) -> str:
        return f"modbus-tcp://{self.host}:{self.port}"

    async def set_registers(
        self, table: str, address: int, values: Iterable[int], unit: int = 1
    ) -> None:
        """Change existing registers (they keep their values over a restart)."""
        regs = [v & 0xFFFF for v in values]
        store = self.devices[unit][table]
        for i, v in enumerate(regs):
            if address + i not in store:
                raise KeyError(f"unit {unit} {table} register {address + i} does not exist")
            store[address + i] = v
        if self._server is not None:
            await self._server.async_setValues(unit, TABLE_FC[table], address, regs)

    def fail_on(self, table: str, address: int, code: int, unit: int = 1) -> None:
        """Answer every read touching this register with Modbus exception ``code``."""
        self.faults[(unit, table, address)] = code

    def clear_faults(self) -> None:
        self.faults.clear()

    async def _action(
        self,
        unit: int,
        function_code: int,
        _start: int,
        address: int,
        count: int,
        _registers: list[int],
        _values: object,
    ) -> ExcCodes | None:
        table = FC_TABLE.get(function_code)
        for a in range(address, address + count):
            code = self.faults.get((unit, table or "", a))
            if code is not None:
                return ExcCodes(code)
        return None

    def function_codes(self) -> set[int]:
        """Every function code received since start (of this object)."""
        return {r.function_code for r in self.requests}

    def _packet(self, sending: bool, data: bytes) -> bytes:
        """Drop the answers of silent units (unit id: byte 6 of a TCP frame, 0 of RTU)."""
        if sending and self.silent_units and data:
            unit = data[0] if self.serial_port is not None else data[6]
            if unit in self.silent_units:
                return b""
        return data

    def _trace(self, sending: bool, pdu: ModbusPDU) -> ModbusPDU:
        if not sending:
            address = getattr(pdu, "address", None)
            count = getattr(pdu, "count", None)
            self.requests.append(Request(pdu.function_code, pdu.dev_id, address, count))
        return pdu


def _copy(devices: Mapping[int, DeviceValues]) -> dict[int, dict[str, dict[int, int]]]:
    return {u: {t: dict(v) for t, v in tables.items()} for u, tables in devices.items()}


@contextlib.asynccontextmanager
async def modbus_server(
    holding: TableValues | None = None,
    input: TableValues | None = None,  # the Modbus table's name
    *,
    devices: Mapping[int, DeviceValues] | None = None,
    unit: int = 1,
    port: int = 0,
    serial_port: str | None = None,
) -> AsyncIterator[ModbusTestServer]:
    """Serve the given registers on 127.0.0.1 (a free port unless ``port``) until exit."""
    if devices is None:
        devices = {unit: {"holding": dict(holding or {}), "input": dict(input or {})}}
    server = ModbusTestServer(_copy(devices), port=port, serial_port=serial_port)
    await server.start()
    try:
        yield server
    finally:
        await server.stop()


@contextlib.asynccontextmanager
async def _raw_server(reply: bytes | None) -> AsyncIterator[int]:
    writers: list[asyncio.StreamWriter] = []

    async def handle(reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        writers.append(writer)
        with contextlib.suppress(ConnectionError, asyncio.CancelledError):
            while await reader.read(260):
                if reply is not None:
                    writer.write(reply)
                    await writer.drain()

    server = await asyncio.start_server(handle, HOST, 0)
    try:
        yield server.sockets[0].getsockname()[1]
    finally:
        server.close()
        for w in writers:
            w.close()
        await server.wait_closed()


def silent_server() -> contextlib.AbstractAsyncContextManager[int]:
    """A TCP server that accepts connections and never answers; yields its port."""
    return _raw_server(None)


def garbage_server() -> contextlib.AbstractAsyncContextManager[int]:
    """A TCP server that answers every request with bytes that are not a Modbus frame."""
    return _raw_server(b"\xde\xad\xbe\xef" * 4)
