"""The protobuf wire format (proto2), by hand: just what a Sparkplug B payload needs. Pure.

Encoding follows the Protocol Buffers encoding guide: a field is a key
``(field_number << 3) | wire_type`` as a varint, then the value: varint (type 0: uint32,
uint64, bool), 64-bit little-endian (type 1: double), length-delimited (type 2: string,
bytes, embedded message), 32-bit little-endian (type 5: float). Negative numbers are never
written here (Sparkplug carries signed integers in its unsigned fields as two's complement;
this program sends none).

``decode`` reads any message into ``{field: [values]}`` with length-delimited values left as
bytes, so a nested message is decoded by calling it again.
"""

from __future__ import annotations

import struct

from edge.errors import WireError

__all__ = [
    "WireError",
    "bool_field",
    "bytes_field",
    "decode",
    "double_field",
    "float_field",
    "string_field",
    "uint_field",
    "varint",
]

_DOUBLE = struct.Struct("<d")
_FLOAT = struct.Struct("<f")


def varint(n: int) -> bytes:
    if n < 0:
        n &= (1 << 64) - 1  # two's complement, as protobuf does for int64
    out = bytearray()
    while True:
        byte = n & 0x7F
        n >>= 7
        if n:
            out.append(byte | 0x80)
        else:
            out.append(byte)
            return bytes(out)


def _key(field: int, wire_type: int) -> bytes:
    return varint((field << 3) | wire_type)


def uint_field(field: int, value: int) -> bytes:
    return _key(field, 0) + varint(value)


def bool_field(field: int, value: bool) -> bytes:
    return _key(field, 0) + (b"\x01" if value else b"\x00")


def double_field(field: int, value: float) -> bytes:
    return _key(field, 1) + _DOUBLE.pack(value)


def float_field(field: int, value: float) -> bytes:
    return _key(field, 5) + _FLOAT.pack(value)


def bytes_field(field: int, value: bytes) -> bytes:
    return _key(field, 2) + varint(len(value)) + value


def string_field(field: int, value: str) -> bytes:
    return bytes_field(field, value.encode("utf-8"))


def _read_varint(data: bytes, at: int) -> tuple[int, int]:
    shift = result = 0
    while True:
        if at >= len(data):
            raise WireError("truncated varint")
        byte = data[at]
        at += 1
        result |= (byte & 0x7F) << shift
        if not byte & 0x80:
            return result, at
        shift += 7
        if shift > 63:
            raise WireError("varint longer than 10 bytes")


def decode(data: bytes) -> dict[int, list[int | float | bytes]]:
    """Fields of one message: number -> values in order (varints as int, type 1 as the
    double it holds, type 5 as the float, length-delimited as bytes)."""
    out: dict[int, list[int | float | bytes]] = {}
    at = 0
    while at < len(data):
        key, at = _read_varint(data, at)
        field, wire_type = key >> 3, key & 7
        value: int | float | bytes
        if wire_type == 0:
            value, at = _read_varint(data, at)
        elif wire_type == 1:
            if at + 8 > len(data):
                raise WireError("truncated 64-bit field")
            value = _DOUBLE.unpack_from(data, at)[0]
            at += 8
        elif wire_type == 2:
            size, at = _read_varint(data, at)
            if at + size > len(data):
                raise WireError("truncated length-delimited field")
            value = bytes(data[at : at + size])
            at += size
        elif wire_type == 5:
            if at + 4 > len(data):
                raise WireError("truncated 32-bit field")
            value = _FLOAT.unpack_from(data, at)[0]
            at += 4
        else:
            raise WireError(f"unsupported wire type {wire_type}")
        if field == 0:
            raise WireError("field number 0")
        out.setdefault(field, []).append(value)
    return out
