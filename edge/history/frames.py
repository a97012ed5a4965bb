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
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from edge.model import Level, PointState, Sample

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


@dataclass(frozen=True, slots=True)
class Layout:
    """The order of series in a frame (fixed between reloads)."""

    points: tuple[str, ...]
    tags: tuple[str, ...]

    @property
    def names(self) -> tuple[str, ...]:
        return tuple(point_series(p, q) for p in self.points for q in POINT_SERIES) + self.tags

    @classmethod
    def of(cls, points: Iterable[str], tags: Iterable[str]) -> Layout:
        return cls(tuple(sorted(points)), tuple(sorted(tags)))


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
        """The frame of one pass; a point or tag without data is ``NO_SAMPLE``."""
        v = array("f")
        q = bytearray()
        for name in layout.points:
            p = points.get(name)
            if p is None:
                v.extend((NAN, NAN, NAN, NAN))
                q.extend((NO_SAMPLE,) * 4)
                continue
            readings = p.readings
            for quantity in POINT_SERIES:
                r = readings.get(quantity)
                if r is None:
                    v.append(NAN)
                    q.append(NO_SAMPLE)
                    continue
                level = int(r.quality.level)
                value = r.value
                if level == Level.BAD or value is None or not math.isfinite(value):
                    v.append(NAN)
                    q.append(0)
                else:
                    v.append(value)
                    q.append(level)
        for tag in layout.tags:
            s = snapshot.get(tag)
            if s is None:
                v.append(NAN)
                q.append(NO_SAMPLE)
            elif s.usable:
                v.append(s.value)
                q.append(int(s.quality.level))
            else:
                v.append(NAN)
                q.append(0)
        return cls(time, layout, v.tobytes(), bytes(q))


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
