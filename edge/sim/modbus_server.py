"""The boiler PLC of the simulated plant, served over Modbus TCP on loopback.

Its register map mixes encodings the way real PLCs do: 32-bit floats in both word orders
and with swapped bytes, int16 counts scaled to engineering units, and the drum pressure as
raw counts of a 4-20 mA input card (0-27648 counts for 4-20 mA, so a failed loop reads
below zero). ``link(False)`` takes the server off the network (the cable is pulled: the
port closes), ``link(True)`` puts it back with the latest values.
"""

from __future__ import annotations

import asyncio
import math
import struct
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Literal

from pymodbus.server import ModbusTcpServer
from pymodbus.simulator import DataType, SimData, SimDevice

from edge.errors import EdgeError

__all__ = ["REGISTERS", "ModbusPlantServer", "Register", "encode"]

HOLDING, INPUT = 3, 4  # Modbus function codes of the two register tables


@dataclass(frozen=True, slots=True, kw_only=True)
class Register:
    """Where one instrument reading sits in the PLC, and how it is encoded."""

    reading: str  # field of edge.sim.plant.Readings
    table: Literal["holding", "input"]
    address: int
    type: Literal["int16", "uint16", "float32"]
    word_order: Literal["big", "little"] = "big"
    byte_swap: bool = False
    scale: tuple[float, float, float, float] | None = None  # raw lo, raw hi, reading lo, hi

    @property
    def count(self) -> int:
        return 2 if self.type == "float32" else 1


REGISTERS: tuple[Register, ...] = (
    # drum pressure transmitter A: 4-20 mA input card, 0..27648 counts for 4..20 mA
    Register(reading="drum_p_ma", table="input", address=0, type="int16", scale=(0, 27648, 4, 20)),
    Register(reading="drum_t", table="input", address=1, type="int16", scale=(0, 10000, 0, 1000)),
    Register(reading="fw_t", table="input", address=2, type="uint16", scale=(0, 65535, 0, 250)),
    Register(reading="cond_p", table="input", address=3, type="int16", scale=(0, 1000, 0, 100)),
    Register(reading="sh_p", table="holding", address=0, type="float32", word_order="big"),
    Register(reading="sh_t", table="holding", address=2, type="float32", word_order="little"),
    Register(
        reading="fw_p", table="holding", address=4, type="float32", word_order="big", byte_swap=True
    ),
    Register(reading="cond_t", table="holding", address=6, type="float32", word_order="little"),
    # the dye-house main's meters: orifice dp (kPa) and vortex volume flow (m3/h)
    Register(reading="main_dp", table="holding", address=8, type="float32", word_order="big"),
    Register(reading="vortex_q", table="holding", address=10, type="float32", word_order="big"),
)

_TABLE_SIZE = 16  # registers per table


def encode(register: Register, value: float) -> list[int]:
    """The register words (0..65535) that carry ``value`` (in the reading's unit)."""
    if register.type == "float32":
        hi, lo = struct.unpack(">HH", struct.pack(">f", value))
        words = [hi, lo] if register.word_order == "big" else [lo, hi]
        if register.byte_swap:
            words = [((w & 0xFF) << 8) | (w >> 8) for w in words]
        return words
    raw = value
    if register.scale is not None:
        raw_lo, raw_hi, lo, hi = register.scale
        raw = raw_lo + (value - lo) * (raw_hi - raw_lo) / (hi - lo)
    raw = round(raw) if math.isfinite(raw) else 0
    if register.type == "int16":
        raw = min(max(raw, -32768), 32767)
        return [raw & 0xFFFF]
    return [min(max(raw, 0), 65535)]


def _device(unit_id: int) -> SimDevice:
    def words() -> list[SimData]:
        return [SimData(0, count=_TABLE_SIZE, values=0, datatype=DataType.REGISTERS)]

    def bits() -> list[SimData]:
        return [SimData(0, count=16, values=False, datatype=DataType.BITS)]

    return SimDevice(unit_id, simdata=(bits(), bits(), words(), words()))


class ModbusPlantServer:
    """A Modbus TCP server holding the PLC's registers."""

    def __init__(self, host: str, port: int, *, unit_id: int = 1) -> None:
        self.host, self.port, self.unit_id = host, port, unit_id
        self._server: ModbusTcpServer | None = None
        self._latest: dict[str, float] = {}
        self._lock = asyncio.Lock()

    @property
    def up(self) -> bool:
        return self._server is not None

    async def start(self) -> None:
        async with self._lock:
            if self._server is None:
                await self._open()

    async def _open(self) -> None:
        server = ModbusTcpServer(_device(self.unit_id), address=(self.host, self.port))
        try:
            await server.serve_forever(background=True)
        except (OSError, RuntimeError) as exc:  # pymodbus: RuntimeError when the port is taken
            raise EdgeError(
                f"simulator: cannot serve Modbus TCP on {self.host}:{self.port} "
                "(port in use or address not available)"
            ) from exc
        self._server = server
        await self._write(self._latest)

    async def stop(self) -> None:
        async with self._lock:
            if self._server is not None:
                server, self._server = self._server, None
                await server.shutdown()

    async def link(self, up: bool) -> None:
        """Put the PLC on the network or take it off."""
        if up:
            await self.start()
        else:
            await self.stop()

    async def update(self, readings: Mapping[str, float]) -> None:
        """Write the latest readings into the registers (kept for a restart while down)."""
        self._latest.update(readings)
        async with self._lock:
            if self._server is not None:
                await self._write(readings)

    async def _write(self, readings: Mapping[str, float]) -> None:
        assert self._server is not None
        for reg in REGISTERS:
            if reg.reading in readings:
                fc = HOLDING if reg.table == "holding" else INPUT
                words = encode(reg, readings[reg.reading])
                await self._server.async_setValues(self.unit_id, fc, reg.address, words)
