"""What one evaluation pass leaves in the history: a frame of every series' value and
quality at one time, and the packing of value runs into bytes. Pure: no clock, no I/O.

A series is named like an alarm signal: ``<point>.<quantity>`` for the point figures kept
(absolute pressure, temperature, Tsat, superheat) and the tag name for a tag's raw value
(SI, in the tag's own pressure reference). Values are float32 (0.1 Pa at 10 MPa, 30 uK at
600 K: finer than any transmitter), qualities one byte each: 0 bad, 1 uncertain, 2 good,
255 no sample. A bad value is stored as NaN: the number a source could not vouch for is
never kept as if it were one.
"""

from __future__ import annotations

import math
from array import array
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from itertools import chain, repeat
from operator import attrgetter, itemgetter
from typing import Any

from edge.model import PointState, Sample

__all__ = [
    "NO_SAMPLE",
    "POINT_SERIES",
    "Frame",
    "Layout",
    "pack_q",
    "pack_v",
    "point_series",
    "unpack_q",
    "unpack_v",
]

POINT_SERIES = ("pressure", "temperature", "tsat", "superheat")
NO_SAMPLE = 255
QUALITY_WORDS = {0: "bad", 1: "uncertain", 2: "good"}
NAN = float("nan")


def point_series(point: str, quantity: str) -> str:
    return f"{point}.{quantity}"


CHUNK = 256  # points (or 4 x CHUNK tags) captured at a time: a chunk's objects stay in cache


@dataclass(frozen=True, slots=True)
class _Chunk:
    """Some of a layout's points (four series each) or tags, and their getter from a
    mapping: one C call, a KeyError when one is missing."""

    keys: tuple[str, ...]
    points: bool
    get: Callable[[Mapping[str, Any]], tuple[Any, ...]]

    @classmethod
    def of(cls, keys: tuple[str, ...], points: bool) -> _Chunk:
        if len(keys) > 1:
            return cls(keys, points, itemgetter(*keys))
        return cls(keys, points, lambda mapping: tuple(mapping[k] for k in keys))


def _chunks(keys: tuple[str, ...], size: int, points: bool) -> tuple[_Chunk, ...]:
    return tuple(_Chunk.of(keys[i : i + size], points) for i in range(0, len(keys), size))


@dataclass(frozen=True, slots=True)
class Layout:
    """The order of series in a frame (fixed between reloads). ``names`` and the chunks
    capture reads by are made once: at 5,000 points ``names`` is 30,000 strings, read by
    every write of a frame."""

    points: tuple[str, ...]
    tags: tuple[str, ...]
    names: tuple[str, ...] = field(init=False, repr=False, compare=False)
    chunks: tuple[_Chunk, ...] = field(init=False, repr=False, compare=False)

    def __post_init__(self) -> None:
        names = tuple(point_series(p, q) for p in self.points for q in POINT_SERIES)
        object.__setattr__(self, "names", names + self.tags)
        chunks = _chunks(self.points, CHUNK, True) + _chunks(self.tags, 4 * CHUNK, False)
        object.__setattr__(self, "chunks", chunks)

    @classmethod
    def of(cls, points: Iterable[str], tags: Iterable[str]) -> Layout:
        return cls(tuple(sorted(points)), tuple(sorted(tags)))


class _Absent:
    """Stands in for a point, reading or sample a pass does not have: no value, quality
    ``NO_SAMPLE``; it reads like a Reading/Sample to the attribute getters of capture."""

    __slots__ = ()
    value = 0.0
    level = NO_SAMPLE

    @property
    def quality(self) -> _Absent:
        return self

    @property
    def readings(self) -> dict[str, _Absent]:
        return _ABSENT_READINGS


_ABSENT = _Absent()
_ABSENT_READINGS = dict.fromkeys(POINT_SERIES, _ABSENT)
_readings = attrgetter("readings")
_quad = itemgetter(*POINT_SERIES)
_value = attrgetter("value")
_level = attrgetter("quality.level")


@dataclass(frozen=True, slots=True)
class Frame:
    """Every series of ``layout`` at ``time``: values (float32 bytes) and qualities."""

    time: float
    layout: Layout
    values: bytes
    quality: bytes

    @classmethod
    def capture(
        cls,
        time: float,
        layout: Layout,
        points: Mapping[str, PointState],
        snapshot: Mapping[str, Sample],
    ) -> Frame:
        """The frame of one pass; a point or tag without data is ``NO_SAMPLE``. A value
        that is bad, missing (None) or not finite is NaN with quality 0; otherwise the
        value with its quality level.

        Runs on the event loop every pass, so the per-series work is done by C loops
        (``map`` over attribute and item getters, ``sum``, ``array``); Python only visits
        the series that are not good, one by one."""
        v = array("f")
        q = bytearray()
        for chunk in layout.chunks:
            source: Mapping[str, Any] = points if chunk.points else snapshot
            try:
                found = chunk.get(source)
            except KeyError:  # a point not evaluated (yet), a tag without a first sample
                found = tuple(map(source.get, chunk.keys, repeat(_ABSENT)))
            if chunk.points:
                try:
                    items = list(chain.from_iterable(map(_quad, map(_readings, found))))
                except KeyError:  # a point without one of the four figures
                    items = [p.readings.get(x, _ABSENT) for p in found for x in POINT_SERIES]
            else:
                items = found  # type: ignore[assignment]
            values: list[Any] = list(map(_value, items))
            quality = bytearray(map(_level, items))
            _settle(values, quality)
            v.fromlist(values)
            q += quality
        return cls(time, layout, v.tobytes(), bytes(q))


def _settle(values: list[Any], quality: bytearray) -> None:
    """NaN where a value is bad (quality 0), None or not finite (then quality 0), or
    there is no sample. Python visits only those."""
    out = _positions(quality, 0)  # bad, whatever value it came with
    for i in out:
        values[i] = 0.0
    try:
        total = sum(values)
    except TypeError:  # a value of None
        for i, x in enumerate(values):
            if x is None:
                values[i] = 0.0
                quality[i] = 0
                out.append(i)
        total = sum(values)
    if not math.isfinite(total):  # a value not finite (NaN, inf) and not marked bad
        for i, x in enumerate(values):
            if not math.isfinite(x):
                quality[i] = 0
                out.append(i)
    out += _positions(quality, NO_SAMPLE)
    for i in out:
        values[i] = NAN


def _positions(data: bytearray, byte: int) -> list[int]:
    """Where ``byte`` is in ``data`` (found by C, visited only where it is)."""
    out = []
    i = data.find(byte)
    while i >= 0:
        out.append(i)
        i = data.find(byte, i + 1)
    return out


def pack_v(values: Iterable[float]) -> bytes:
    if isinstance(values, array) and values.typecode == "f":
        return values.tobytes()
    return array("f", values).tobytes()


def unpack_v(blob: bytes) -> array[float]:
    out = array("f")
    out.frombytes(blob)
    return out


def pack_q(quality: bytes | bytearray, n: int) -> bytes:
    """Qualities of a run; a run of one quality (the usual case) is one byte."""
    if n and quality.count(quality[0]) == n:
        return bytes(quality[:1])
    return bytes(quality)


def unpack_q(blob: bytes, n: int) -> bytes:
    return blob * n if len(blob) == 1 and n != 1 else blob
