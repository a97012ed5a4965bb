"""A Modbus TCP server that misbehaves on purpose, written on raw asyncio streams (no
Modbus library), so a test controls every byte of every reply.

    async with rogue_server(registers, mode="tid0") as server:
        server.port, server.requests

Modes: ``honest`` (a correct reply), ``tid0`` (transaction id 0 in every reply),
``tid0_repeat`` (transaction id 0, and the previous reply sent again before each reply, as
a confused gateway does), ``repeat`` (each reply sent twice, ids correct),
``stale_repeat`` (the previous reply, with its own transaction id, sent again before each
reply), ``wrong_fc``
(function 4 in the reply to 3 and 3 to 4), ``wrong_unit`` (the unit id plus one),
``short`` (one register fewer than asked, byte count to match), ``bad_protocol`` (protocol
id 7 in the header), ``exception`` (exception 02, illegal data address, to every request),
``trickle`` (each reply written a byte at a time). Registers not given read 0.
Frame layout: Modbus Messaging on TCP/IP Implementation Guide v1.0b, section 3.1.3 (MBAP
header: transaction id, protocol id 0, length, unit id) and Modbus Application Protocol
v1.1b3, section 6.3 (function 3/4: byte count then registers), from memory.
"""

from __future__ import annotations

import asyncio
import contextlib
import struct
from collections.abc import AsyncIterator, Mapping
from dataclasses import dataclass, field

MODES = (
    "honest", "tid0", "tid0_repeat", "repeat", "stale_repeat", "wrong_fc", "wrong_unit", "short",
    "bad_protocol", "exception", "trickle",
)  # fmt: skip


@dataclass
class RogueServer:
    registers: Mapping[int, int]
    mode: str
    port: int = 0
    requests: list[tuple[int, int, int, int, int]] = field(default_factory=list)
    # (transaction id, unit, function, start, count) of every request received

    def reply(self, tid: int, unit: int, fc: int, start: int, count: int) -> bytes:
        if self.mode == "short":
            count -= 1
        regs = [self.registers.get(start + i, 0) for i in range(count)]
        pdu = struct.pack(">BB", fc, 2 * count) + struct.pack(f">{count}H", *regs)
        if self.mode == "wrong_fc":
            pdu = bytes([7 - fc]) + pdu[1:]
        if self.mode.startswith("tid0"):
            tid = 0
        if self.mode == "wrong_unit":
            unit = (unit + 1) % 256
        if self.mode == "exception":
            pdu = bytes([fc | 0x80, 0x02])
        protocol = 7 if self.mode == "bad_protocol" else 0
        return struct.pack(">HHHB", tid, protocol, len(pdu) + 1, unit) + pdu


@contextlib.asynccontextmanager
async def rogue_server(registers: Mapping[int, int], mode: str) -> AsyncIterator[RogueServer]:
    assert mode in MODES, mode
    state = RogueServer(registers, mode)
    writers: list[asyncio.StreamWriter] = []

    async def handle(reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        writers.append(writer)
        previous = b""
        with contextlib.suppress(ConnectionError, asyncio.IncompleteReadError):
            while True:
                head = await reader.readexactly(7)
                tid, _pid, length, unit = struct.unpack(">HHHB", head)
                body = await reader.readexactly(length - 1)
                fc, start, count = struct.unpack(">BHH", body[:5])
                state.requests.append((tid, unit, fc, start, count))
                frame = state.reply(tid, unit, fc, start, count)
                if mode in ("tid0_repeat", "stale_repeat") and previous:
                    writer.write(previous)
                if mode == "trickle":
                    for i in range(len(frame)):
                        writer.write(frame[i : i + 1])
                        await writer.drain()
                        await asyncio.sleep(0.001)
                else:
                    writer.write(frame)
                if mode == "repeat":
                    writer.write(frame)
                previous = frame
                await writer.drain()

    server = await asyncio.start_server(handle, "127.0.0.1", 0)
    state.port = server.sockets[0].getsockname()[1]
    try:
        yield state
    finally:
        server.close()
        for w in writers:
            w.close()
        await server.wait_closed()
