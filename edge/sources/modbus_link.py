"""The wire side of Modbus: one pymodbus client, reads of holding and input registers only,
and every library error translated into a ``Failure`` with a bounded kind and a reason.

Read-only by construction: the only requests this module can issue are function codes 3
(read holding registers) and 4 (read input registers). pymodbus's own reconnect loop is
switched off (``reconnect_delay=0``); the source reconnects with its own capped backoff.
"""

from __future__ import annotations

import asyncio
from dataclasses import dataclass
from typing import Any

from pymodbus.client import AsyncModbusSerialClient, AsyncModbusTcpClient
from pymodbus.exceptions import ConnectionException, ModbusIOException
from pymodbus.framer import FramerType
from pymodbus.pdu import register_message

from edge.config import ModbusRtuSource, ModbusTcpSource
from edge.model import COMM_LOSS
from edge.sources.cancel import cancelling, raise_if_cancelling

__all__ = [
    "EXCEPTION_REASONS",
    "FUNCTION_CODES",
    "Failure",
    "ModbusLink",
    "exception_failure",
]

ModbusConfig = ModbusTcpSource | ModbusRtuSource

PROTOCOL_ERROR = "protocol_error"  # quality reason of a block whose reply did not match

# table -> function code; nothing else is ever sent
FUNCTION_CODES = {"holding": 3, "input": 4}

# Modbus exception codes (Modbus application protocol v1.1b3, section 7) -> quality reason
EXCEPTION_REASONS = {
    0x01: "illegal_function",
    0x02: "illegal_data_address",
    0x03: "illegal_data_value",
    0x04: "device_failure",
    0x05: "acknowledge",
    0x06: "device_busy",
    0x07: "negative_acknowledge",
    0x08: "memory_parity_error",
    0x0A: "gateway_path_unavailable",
    0x0B: "gateway_no_response",
}


@dataclass(frozen=True, slots=True)
class Failure:
    """Why a read gave no registers. ``kind`` labels the error counter; ``reason`` is the
    quality reason of the tags it blanks; ``comm`` says whether the link itself failed."""

    kind: str  # timeout, connection, protocol, bad_response, exception_02, ...
    reason: str
    comm: bool
    message: str = ""
    code: int | None = None  # Modbus exception code


def exception_failure(code: int, message: str = "") -> Failure:
    """The Failure of a Modbus exception response."""
    reason = EXCEPTION_REASONS.get(code, f"modbus_exception_{code:02x}")
    text = message or f"exception {code:02X} ({reason.replace('_', ' ')})"
    return Failure(f"exception_{code:02x}", reason, False, text, code)


def _client(config: ModbusConfig) -> Any:
    common: dict[str, Any] = {
        "timeout": config.timeout,
        "retries": config.retries,
        "reconnect_delay": 0,  # no reconnect of its own: the source does it, capped
        "reconnect_delay_max": min(config.backoff_max, 30.0),
    }
    if isinstance(config, ModbusTcpSource):
        return AsyncModbusTcpClient(config.host, port=config.port, **common)
    return AsyncModbusSerialClient(
        config.device,
        framer=FramerType.RTU,
        baudrate=config.baudrate,
        parity=config.parity,
        stopbits=config.stopbits,
        bytesize=config.bytesize,
        **common,
    )


def where(config: ModbusConfig) -> str:
    if isinstance(config, ModbusTcpSource):
        return f"{config.host}:{config.port}"
    return config.device


class ModbusLink:
    """One connection to a Modbus TCP device or an RTU line. Never raises on plant faults:
    reads return registers or a Failure."""

    def __init__(self, config: ModbusConfig) -> None:
        self.config = config
        self._client: Any = None
        # pymodbus gives up after timeout x (retries + 1); this guard only catches a hang
        self._deadline = config.timeout * (config.retries + 1) + 1.0

    @property
    def connected(self) -> bool:
        return self._client is not None and bool(self._client.connected)

    async def connect(self) -> Failure | None:
        """Open a fresh connection; None on success."""
        self.close()
        client = _client(self.config)
        try:
            async with asyncio.timeout(self.config.timeout + 1.0):
                ok = await client.connect()
        except TimeoutError:
            ok = False
        except Exception as exc:  # the boundary: OSError, termios.error, SerialException ...
            client.close()
            raise_if_cancelling()
            return Failure("connect", COMM_LOSS, True, f"cannot open {where(self.config)}: {exc}")
        if not ok:
            client.close()
            raise_if_cancelling()
            return Failure("connect", COMM_LOSS, True, f"cannot connect to {where(self.config)}")
        if cancelling():
            client.close()
            raise asyncio.CancelledError
        self._client = client
        return None

    def close(self) -> None:
        if self._client is not None:
            self._client.close()
            self._client = None

    def start(self, table: str, unit: int, start: int, count: int) -> asyncio.Task[Any]:
        """``read`` started as a task (the source's face: ``start`` then ``finish``)."""
        return asyncio.ensure_future(self.read(table, unit, start, count))

    async def finish(self, request: asyncio.Task[Any]) -> list[int] | Failure:
        return await request  # type: ignore[no-any-return]

    async def read(self, table: str, unit: int, start: int, count: int) -> list[int] | Failure:
        """Read ``count`` registers of ``table`` from ``start`` (function code 3 or 4)."""
        if not self.connected:
            return Failure("connection", COMM_LOSS, True, "not connected")
        if table == "holding":
            request: Any = register_message.ReadHoldingRegistersRequest(
                address=start, count=count, dev_id=unit
            )
        elif table == "input":
            request = register_message.ReadInputRegistersRequest(
                address=start, count=count, dev_id=unit
            )
        else:
            raise ValueError(f"unknown table {table!r}")  # config forbids it
        try:
            async with asyncio.timeout(self._deadline):
                response = await self._client.execute(False, request)
            raise_if_cancelling()
        except TimeoutError:
            return Failure("timeout", COMM_LOSS, True, "no answer (hung request)")
        except ConnectionException as exc:
            return Failure("connection", COMM_LOSS, True, str(exc))
        except ModbusIOException as exc:
            # no response within timeout x (retries + 1), or an answer to someone else
            return Failure("timeout", COMM_LOSS, True, str(exc))
        except Exception as exc:  # the boundary: ModbusException, OSError, struct.error ...
            return Failure("protocol", COMM_LOSS, True, f"{type(exc).__name__}: {exc}")
        mismatch = self._mismatch(table, request, response)
        if mismatch is not None:
            return mismatch
        if response.isError():
            code = getattr(response, "exception_code", 0) or 0
            return exception_failure(code)
        registers = list(getattr(response, "registers", None) or [])
        if len(registers) != count:
            message = f"asked for {count} registers ({2 * count} bytes), got {len(registers)}"
            return Failure("byte_count", PROTOCOL_ERROR, False, message)
        return registers

    def _mismatch(self, table: str, request: Any, response: Any) -> Failure | None:
        """A reply that does not answer this request (another transaction, another unit,
        another function) is a protocol error, never data: a gateway answering with
        transaction id 0 or repeating a frame must not give one block another's values.
        The stream is out of step, so the link is dropped (``comm``) and reopened."""
        fc = FUNCTION_CODES[table]
        got_fc = int(getattr(response, "function_code", 0) or 0) & 0x7F
        if got_fc != fc:
            return Failure(
                "function_code", PROTOCOL_ERROR, True, f"asked with function {fc}, got {got_fc}"
            )
        if response.dev_id != request.dev_id:
            message = f"asked unit {request.dev_id}, the reply is from unit {response.dev_id}"
            return Failure("unit_id", PROTOCOL_ERROR, True, message)
        if isinstance(self.config, ModbusTcpSource) and (
            response.transaction_id != request.transaction_id
        ):
            message = (
                f"sent transaction {request.transaction_id}, "
                f"the reply carries {response.transaction_id}"
            )
            return Failure("transaction_id", PROTOCOL_ERROR, True, message)
        return None
