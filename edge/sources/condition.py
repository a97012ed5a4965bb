"""Tag conditioning: raw number -> SI value with quality. Small steps applied in order,
each a pure function: finite check, NE 43 loop check, linear scale, validity range, unit.
Shared by every protocol adapter, so a tag behaves the same whatever wire it came over."""

from __future__ import annotations

import math

from edge import units
from edge.config import Tag
from edge.errors import ConfigError
from edge.model import (
    GOOD,
    NOT_A_NUMBER,
    OUT_OF_RANGE,
    SENSOR_FAULT,
    Level,
    Quality,
    bad,
    uncertain,
    worst,
)

# NAMUR NE 43: 3.8-20.5 mA is the measuring range (with under/over-range margins);
# <= 3.6 mA or >= 21.0 mA signals a failure.
NE43_FAIL_LOW = 3.6
NE43_FAIL_HIGH = 21.0
NE43_RANGE_LOW = 3.8
NE43_RANGE_HIGH = 20.5


def ne43(current_ma: float) -> Quality:
    """Quality of a 4-20 mA loop current per NAMUR NE 43."""
    if current_ma <= NE43_FAIL_LOW or current_ma >= NE43_FAIL_HIGH:
        return bad(SENSOR_FAULT)
    if current_ma < NE43_RANGE_LOW or current_ma > NE43_RANGE_HIGH:
        return uncertain(OUT_OF_RANGE)
    return GOOD


def linear(raw: float, scale: tuple[float, float, float, float]) -> float:
    raw_lo, raw_hi, eng_lo, eng_hi = scale
    return eng_lo + (raw - raw_lo) * (eng_hi - eng_lo) / (raw_hi - raw_lo)


def loop_current(raw: float, scale: tuple[float, float, float, float]) -> float:
    """The loop current (mA) a raw count stands for, where scale's raw lo/hi are 4/20 mA."""
    raw_lo, raw_hi = scale[0], scale[1]
    return 4.0 + 16.0 * (raw - raw_lo) / (raw_hi - raw_lo)


def condition(tag: Tag, raw: float) -> tuple[float, Quality]:
    """Turn a decoded raw number into ``(SI value, quality)``. Never raises on plant data:
    a bad value comes back as NaN with quality bad and a reason."""
    return Conditioner(tag)(raw)


# What a quantity can physically be, in SI, by kind and pressure reference (issue: PLC
# sentinels such as float32 max or int16 min must never pass as good). Absolute pressure
# 0..100 MPa (IF97 ends at 100 MPa); a gauge reading is at least -110 kPa (a full vacuum
# under the highest barometer, common practice) and a vacuum reading at most +110 kPa;
# temperature 173..2273 K (IF97 region 5 ends at 2273.15 K; nothing in a steam plant is
# colder than -100 degC). A tag's ``valid_range`` replaces these bounds.
PHYSICAL: dict[tuple[str, str | None], tuple[float, float]] = {
    ("pressure", "absolute"): (0.0, 100e6),
    ("pressure", "gauge"): (-110e3, 100e6),
    ("pressure", None): (-110e3, 100e6),
    ("pressure", "vacuum"): (-100e6, 110e3),
    ("temperature", None): (173.0, 2273.0),
}
# A raw value outside the ``scale`` raw span is extrapolated but uncertain(out_of_range)
# (a transmitter a little over its range still says something); beyond this share of the
# span outside it, it is bad(out_of_range): no real instrument reads that far past its range.
SCALE_MARGIN = 0.10
_INF = 1.7976931348623157e308  # the largest finite float: infinity is never in bounds


class Conditioner:
    """``condition`` for one tag, with the unit and scale folded once into multiply-adds:
    a source that polls hundreds of tags a cycle builds one per tag and calls it with each
    raw value (about 0.3 µs a call)."""

    __slots__ = ("_a", "_b", "_c", "_k", "_loop", "_phys", "_range", "_raw", "_scale", "linear")

    def __init__(self, tag: Tag) -> None:
        if tag.scale is not None and tag.scale[0] == tag.scale[1]:
            raise ConfigError(f"tag {tag.name}: scale raw low and raw high are equal")
        info = units.unit_info(tag.unit)
        self._scale = tag.scale
        self._loop = tag.signal == "4-20mA" and tag.scale is not None
        self._range = tag.valid_range
        # engineering value = raw * k + c; SI value = raw * a + b
        if tag.scale is not None:
            raw_lo, raw_hi, eng_lo, eng_hi = tag.scale
            self._k = (eng_hi - eng_lo) / (raw_hi - raw_lo)
            self._c = eng_lo - raw_lo * self._k
        else:
            self._k, self._c = 1.0, 0.0
        self._a = self._k * info.factor
        self._b = self._c * info.factor + info.offset
        reference = tag.reference if info.kind == "pressure" else None
        self._phys: tuple[float, float] | None = (
            None if tag.valid_range is not None else PHYSICAL.get((info.kind, reference))
        )
        # the raw span of a (non-loop) scale: inside good, a margin uncertain, beyond bad
        self._raw: tuple[float, float, float] | None = None
        if tag.scale is not None and not self._loop:
            lo, hi = sorted(tag.scale[:2])
            self._raw = (lo, hi, (hi - lo) * SCALE_MARGIN)
        # (a, b, lo, hi): SI = raw * a + b is good when lo <= SI <= hi (a NaN never is); a
        # hot loop may apply it inline and call the conditioner for anything outside.
        self.linear: tuple[float, float, float, float] | None = (
            None if self._loop else (self._a, self._b, *self._good_si(info))
        )

    def _good_si(self, info: units.UnitInfo) -> tuple[float, float]:
        lo, hi = self._phys if self._phys is not None else (-_INF, _INF)
        if self._range is not None:
            ends = sorted(v * info.factor + info.offset for v in self._range)
            lo, hi = max(lo, ends[0]), min(hi, ends[1])
        if self._raw is not None:
            ends = sorted(r * self._a + self._b for r in self._raw[:2])
            lo, hi = max(lo, ends[0]), min(hi, ends[1])
        return lo, hi

    def __call__(self, raw: float) -> tuple[float, Quality]:
        cls = raw.__class__
        if cls is not float:
            if cls is bool or not isinstance(raw, int | float):
                return _NOT_A_NUMBER
            try:
                raw = float(raw)
            except OverflowError:
                return _OUT_OF_RANGE
        if raw - raw != 0.0:  # NaN or infinity
            return _NOT_A_NUMBER
        quality = GOOD
        if self._loop:
            quality = ne43(loop_current(raw, self._scale))  # type: ignore[arg-type]
            if quality.level is Level.BAD:
                return math.nan, quality
        elif self._raw is not None:
            lo, hi, margin = self._raw
            if raw < lo - margin or raw > hi + margin:
                return _OUT_OF_RANGE
            if raw < lo or raw > hi:
                quality = uncertain(OUT_OF_RANGE)
        if self._range is not None:
            value = raw * self._k + self._c
            lo, hi = self._range
            if not lo <= value <= hi:
                return math.nan, worst(quality, bad(OUT_OF_RANGE))
        si = raw * self._a + self._b
        if si - si != 0.0:  # overflowed to infinity
            return _NOT_A_NUMBER
        if self._phys is not None and not self._phys[0] <= si <= self._phys[1]:
            return _OUT_OF_RANGE
        return si, quality


_OUT_OF_RANGE = (math.nan, bad(OUT_OF_RANGE))
_NOT_A_NUMBER = (math.nan, bad(NOT_A_NUMBER))
