"""Physical-range and scale checks of tag conditioning (issue 10, item 3): PLC sentinel
values (float32 max, int16 min/max, uint32 max) never come out as good pressures or
temperatures, and a value outside ``scale`` is uncertain, then bad."""

from __future__ import annotations

import math

import pytest

from edge.config import ModbusTag
from edge.model import GOOD, OUT_OF_RANGE, Level
from edge.sources.condition import Conditioner

FLOAT32_MAX = 3.4028234663852886e38  # IEEE 754 binary32 largest finite (from memory)
UINT32_MAX = 4294967295
INT16_MIN, INT16_MAX = -32768, 32767


def tag(**kw: object) -> ModbusTag:
    base: dict[str, object] = {"name": "t", "table": "holding", "address": 0, "unit": "bar"}
    if str(kw.get("unit", "bar")) in ("bar", "MPa", "kPa"):
        base["reference"] = "absolute"
    return ModbusTag(**(base | kw))  # type: ignore[arg-type]


@pytest.mark.parametrize("raw", [FLOAT32_MAX, float(UINT32_MAX), -1.0, 1000.01])
def test_absolute_pressure_outside_0_to_100_mpa_is_bad(raw: float):
    """Absolute pressure below 0 or above 100 MPa (1000 bar) is bad out_of_range."""
    value, q = Conditioner(tag(type="float32"))(raw)
    assert math.isnan(value) and q.level is Level.BAD and q.reason == OUT_OF_RANGE


def test_absolute_pressure_at_100_mpa_is_good():
    """100 MPa itself, the end of IAPWS-IF97, is still good."""
    assert Conditioner(tag(unit="MPa"))(100.0) == (100e6, GOOD)


@pytest.mark.parametrize(("raw", "level"), [(-1.0, Level.GOOD), (-1.2, Level.BAD)])
def test_gauge_pressure_may_be_a_vacuum_down_to_minus_110_kpa(raw: float, level: Level):
    """A gauge reading of -1 bar (near full vacuum) is good, -1.2 bar cannot be."""
    assert Conditioner(tag(reference="gauge"))(raw)[1].level is level


@pytest.mark.parametrize(("raw", "good"), [(-99.0, True), (-101.0, False), (2000.0, False)])
def test_temperature_outside_173_to_2273_k_is_bad(raw: float, good: bool):
    """-99 degC is good; -101 degC (below 173 K) and 2000 degC (above 2273 K) are bad."""
    assert Conditioner(tag(unit="degC"))(raw)[1].good is good


@pytest.mark.parametrize("raw", [float(INT16_MIN), float(INT16_MAX)])
def test_int16_sentinels_as_temperature_are_bad(raw: float):
    """int16 min/max read as degC (-32768, 32767) are bad out_of_range."""
    assert Conditioner(tag(unit="degC", type="int16"))(raw)[1].reason == OUT_OF_RANGE


def test_valid_range_replaces_the_physical_bounds():
    """With valid_range 0..5000 degC, 3000 degC is good (the tag's own range says so)."""
    c = Conditioner(tag(unit="degC", valid_range=(0.0, 5000.0)))
    assert c(3000.0) == (pytest.approx(3273.15), GOOD)


def test_inside_the_scale_is_good_and_linear():
    """Raw 0..27648 -> 0..16 bar: raw 13824 is 8 bar, good."""
    c = Conditioner(tag(type="int16", scale=(0, 27648, 0, 16)))
    assert c(13824) == (pytest.approx(8e5), GOOD)


def test_a_little_beyond_the_scale_is_extrapolated_but_uncertain():
    """Raw 29000 (4.9 % of the span past raw high) is extrapolated, uncertain out_of_range."""
    value, q = Conditioner(tag(type="int16", scale=(0, 27648, 0, 16)))(29000)
    assert value == pytest.approx(29000 / 27648 * 16e5)
    assert q.level is Level.UNCERTAIN and q.reason == OUT_OF_RANGE


def test_far_beyond_the_scale_is_bad():
    """int16 max on a 0..27648 scale (18.5 % past raw high) is bad out_of_range."""
    value, q = Conditioner(tag(type="int16", scale=(0, 27648, 0, 16)))(INT16_MAX)
    assert math.isnan(value) and q.level is Level.BAD and q.reason == OUT_OF_RANGE


def test_the_fast_path_bounds_agree_with_the_full_check():
    """``linear`` bounds (used inline by the Modbus hot loop) are the good region: 0 to
    100 MPa for an unscaled absolute pressure in bar."""
    a, b, lo, hi = Conditioner(tag(type="float32")).linear  # type: ignore[misc]
    assert (a, b, lo, hi) == (1e5, 0.0, 0.0, 100e6)
