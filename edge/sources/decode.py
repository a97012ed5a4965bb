"""Register decoding: 16-bit Modbus registers -> numbers. Pure: no I/O, no protocol library.

A value of N bytes ``A B C D ...`` (most significant first, IEEE 754 / two's complement)
travels in N/2 registers. Devices disagree on two things, and both are configurable:

- ``word_order``: ``big`` puts the most significant register first, ``little`` the least.
- ``byte_swap``: the two bytes inside every register are exchanged.

So the four 32-bit layouts are reachable as::

    ABCD  word_order=big     byte_swap=False   (Modbus convention, "big endian")
    CDAB  word_order=little  byte_swap=False   ("word swapped")
    BADC  word_order=big     byte_swap=True    ("byte swapped")
    DCBA  word_order=little  byte_swap=True    ("little endian")

The fast path packs a whole block once and unpacks every tag from it with a precompiled
``struct.Struct``: packing the registers little-endian ("<H") swaps the bytes of every
register, and unpacking little-endian reverses the word order, so each layout is one
choice of (pack order, unpack order).
"""

from __future__ import annotations

import struct
from collections.abc import Sequence
from dataclasses import dataclass

from edge.errors import DecodeError

__all__ = [
    "LAYOUTS_32",
    "LAYOUTS_64",
    "REGISTER_COUNT",
    "TYPES",
    "BlockBytes",
    "BlockDecoder",
    "DecodeError",
    "Decoder",
    "Decoding",
    "all_decodings",
    "decode",
    "layout_name",
    "make_decoder",
]

# type -> (struct letter, registers)
_FORMATS: dict[str, tuple[str, int]] = {
    "int16": ("h", 1),
    "uint16": ("H", 1),
    "int32": ("i", 2),
    "uint32": ("I", 2),
    "float32": ("f", 2),
    "float64": ("d", 4),
}
TYPES: tuple[str, ...] = tuple(_FORMATS)
REGISTER_COUNT: dict[str, int] = {t: n for t, (_, n) in _FORMATS.items()}

# layout name -> (word_order, byte_swap)
LAYOUTS_32: dict[str, tuple[str, bool]] = {
    "ABCD": ("big", False),
    "CDAB": ("little", False),
    "BADC": ("big", True),
    "DCBA": ("little", True),
}
LAYOUTS_64: dict[str, tuple[str, bool]] = {
    "ABCDEFGH": ("big", False),
    "GHEFCDAB": ("little", False),
    "BADCFEHG": ("big", True),
    "HGFEDCBA": ("little", True),
}
_LAYOUTS_16: dict[str, tuple[str, bool]] = {"AB": ("big", False), "BA": ("big", True)}


def _check_type(type_: str) -> tuple[str, int]:
    try:
        return _FORMATS[type_]
    except KeyError:
        raise DecodeError(f"unknown type {type_!r}; expected one of {', '.join(TYPES)}") from None


def _check_order(word_order: str) -> None:
    if word_order not in ("big", "little"):
        raise DecodeError(f"word_order must be 'big' or 'little', got {word_order!r}")


class BlockBytes:
    """The bytes of one block of registers, packed both ways on first use."""

    __slots__ = ("_native", "_swapped", "registers")

    def __init__(self, registers: Sequence[int]) -> None:
        self.registers = registers
        self._native: bytes | None = None
        self._swapped: bytes | None = None

    def native(self) -> bytes:
        """Each register high byte first, as on the wire."""
        if self._native is None:
            self._native = _pack(">", self.registers)
        return self._native

    def swapped(self) -> bytes:
        """Each register low byte first."""
        if self._swapped is None:
            self._swapped = _pack("<", self.registers)
        return self._swapped


def _pack(order: str, registers: Sequence[int]) -> bytes:
    try:
        return struct.pack(f"{order}{len(registers)}H", *registers)
    except struct.error as exc:
        raise DecodeError(f"registers must be integers 0..65535: {exc}") from None


@dataclass(frozen=True, slots=True)
class Decoder:
    """Decodes one type in one layout at a register offset of a block."""

    type: str
    word_order: str
    byte_swap: bool
    count: int  # registers
    swapped_bytes: bool  # unpack from BlockBytes.swapped() rather than native()
    unpacker: struct.Struct

    def __call__(self, block: BlockBytes, offset: int = 0) -> int | float:
        if offset < 0 or offset + self.count > len(block.registers):
            raise DecodeError(
                f"{self.type} at offset {offset} needs {self.count} register(s), "
                f"block has {len(block.registers)}"
            )
        buf = block.swapped() if self.swapped_bytes else block.native()
        value: int | float = self.unpacker.unpack_from(buf, 2 * offset)[0]
        return value


def make_decoder(type_: str, word_order: str = "big", byte_swap: bool = False) -> Decoder:
    """Build the decoder of one type and layout (done once per tag, used every cycle)."""
    letter, count = _check_type(type_)
    _check_order(word_order)
    if count == 1:
        word_order = "big"  # one register has no word order
    big_words = word_order == "big"
    # little-endian packing swaps the bytes of each register; little-endian unpacking
    # reverses all bytes, i.e. the word order *and* the bytes: so for little word order
    # the packing must swap the bytes once more to undo the second effect.
    swapped_bytes = byte_swap if big_words else not byte_swap
    unpacker = struct.Struct((">" if big_words else "<") + letter)
    return Decoder(type_, word_order, byte_swap, count, swapped_bytes, unpacker)


class BlockDecoder:
    """Decodes many values from one block in a few ``struct`` calls: values that share a
    layout are unpacked together by one precompiled format that pads over the registers in
    between. Built once per planned read; ``__call__`` returns the values in item order."""

    __slots__ = ("_groups", "_size", "count")

    def __init__(self, items: Sequence[tuple[int, Decoder]], count: int) -> None:
        """``items``: (register offset, decoder) per value; ``count``: registers in the block."""
        self.count = count
        by_layout: dict[tuple[bool, str], list[tuple[int, int, Decoder]]] = {}
        for index, (offset, decoder) in enumerate(items):
            if offset < 0 or offset + decoder.count > count:
                raise DecodeError(f"value at offset {offset} does not fit a block of {count}")
            order = decoder.unpacker.format[0]
            by_layout.setdefault((decoder.swapped_bytes, order), []).append(
                (offset, index, decoder)
            )
        groups: list[tuple[bool, struct.Struct, list[int]]] = []
        for (swapped, order), members in by_layout.items():
            members.sort(key=lambda m: m[0])
            while members:  # overlapping values go to further formats
                fmt, indices, rest, position = order, [], [], 0
                for offset, index, decoder in members:
                    if offset < position:
                        rest.append((offset, index, decoder))
                        continue
                    pad = 2 * (offset - position)
                    fmt += (f"{pad}x" if pad else "") + decoder.unpacker.format[1:]
                    indices.append(index)
                    position = offset + decoder.count
                groups.append((swapped, struct.Struct(fmt), indices))
                members = rest
        self._groups = groups
        self._size = len(items)

    def __call__(self, registers: Sequence[int]) -> list[int | float]:
        if len(registers) != self.count:
            raise DecodeError(f"expected {self.count} registers, got {len(registers)}")
        block = BlockBytes(registers)
        out: list[int | float] = [0] * self._size
        for swapped, unpacker, indices in self._groups:
            buf = block.swapped() if swapped else block.native()
            for index, value in zip(indices, unpacker.unpack_from(buf), strict=True):
                out[index] = value
        return out


def decode(
    registers: Sequence[int], type_: str, word_order: str = "big", byte_swap: bool = False
) -> int | float:
    """Decode exactly the registers of one value."""
    decoder = make_decoder(type_, word_order, byte_swap)
    if len(registers) != decoder.count:
        raise DecodeError(f"{type_} needs {decoder.count} register(s), got {len(registers)}")
    return decoder(BlockBytes(registers))


def layout_name(type_: str, word_order: str, byte_swap: bool) -> str:
    """ABCD-style name of a layout (AB/BA for 16-bit types)."""
    _, count = _check_type(type_)
    table = {1: _LAYOUTS_16, 2: LAYOUTS_32, 4: LAYOUTS_64}[count]
    if count == 1:
        word_order = "big"
    for name, spec in table.items():
        if spec == (word_order, byte_swap):
            return name
    raise DecodeError(f"no layout {word_order}/{byte_swap}")  # unreachable with valid input


@dataclass(frozen=True, slots=True)
class Decoding:
    """One way of reading registers, for commissioning: where, as what, and the result."""

    offset: int  # first register, relative to the block
    type: str
    layout: str  # AB, BA, ABCD, CDAB, BADC, DCBA, ABCDEFGH, ...
    word_order: str
    byte_swap: bool
    value: int | float


def all_decodings(registers: Sequence[int]) -> list[Decoding]:
    """Every type in every layout at every offset where it fits, in a stable order:
    by type, then offset, then layout."""
    block = BlockBytes(list(registers))
    out: list[Decoding] = []
    for type_ in TYPES:
        _, count = _FORMATS[type_]
        layouts = {1: _LAYOUTS_16, 2: LAYOUTS_32, 4: LAYOUTS_64}[count]
        for offset in range(len(registers) - count + 1):
            for name, (order, swap) in layouts.items():
                value = make_decoder(type_, order, swap)(block, offset)
                out.append(Decoding(offset, type_, name, order, swap, value))
    return out
