"""Test helper: a value -> the Modbus registers that carry it, in any layout, built with
``struct`` and so independent of the code under test (``edge.sources.decode``)."""

from __future__ import annotations

import struct

__all__ = ["encode"]

_FORMAT = {"int16": "h", "uint16": "H", "int32": "i", "uint32": "I", "float32": "f", "float64": "d"}


def encode(value: float, type_: str, word_order: str = "big", byte_swap: bool = False) -> list[int]:
    """The registers that carry ``value`` as ``type_`` in the given layout."""
    data = struct.pack(">" + _FORMAT[type_], value)
    regs = [int.from_bytes(data[i : i + 2], "big") for i in range(0, len(data), 2)]
    if word_order == "little":
        regs.reverse()
    if byte_swap:
        regs = [((r & 0xFF) << 8) | (r >> 8) for r in regs]
    return regs
