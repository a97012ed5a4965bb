"""Register decoding and the conditioning of decoded values (pure)."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from edge.config import ModbusTag
from edge.errors import ConfigError
from edge.model import NOT_A_NUMBER, OUT_OF_RANGE, SENSOR_FAULT, Level
from edge.sources.condition import Conditioner, condition
from edge.sources.decode import (
    LAYOUTS_32,
    LAYOUTS_64,
    REGISTER_COUNT,
    TYPES,
    BlockBytes,
    BlockDecoder,
    DecodeError,
    all_decodings,
    decode,
    layout_name,
    make_decoder,
)
from tests.registers import encode

# IEEE 754 binary32: 123456.0 = 0x47F12000 (bytes A=47 B=F1 C=20 D=00), from memory,
# agrees with Python's struct.pack('>f').
FLOAT32_123456 = {
    "ABCD": [0x47F1, 0x2000],
    "CDAB": [0x2000, 0x47F1],
    "BADC": [0xF147, 0x0020],
    "DCBA": [0x0020, 0xF147],
}
# IEEE 754 binary64: pi = 0x400921FB54442D18 (from memory, agrees with struct.pack('>d')).
FLOAT64_PI = {
    "ABCDEFGH": [0x4009, 0x21FB, 0x5444, 0x2D18],
    "GHEFCDAB": [0x2D18, 0x5444, 0x21FB, 0x4009],
    "BADCFEHG": [0x0940, 0xFB21, 0x4454, 0x182D],
    "HGFEDCBA": [0x182D, 0x4454, 0xFB21, 0x0940],
}


@pytest.mark.parametrize("layout", list(FLOAT32_123456))
def test_float32_every_layout(layout):
    """123456.0 decodes from each of the four 32-bit layouts."""
    order, swap = LAYOUTS_32[layout]
    assert decode(FLOAT32_123456[layout], "float32", order, swap) == 123456.0


@pytest.mark.parametrize("layout", list(FLOAT64_PI))
def test_float64_every_layout(layout):
    """pi decodes exactly from each of the four 64-bit layouts."""
    order, swap = LAYOUTS_64[layout]
    assert decode(FLOAT64_PI[layout], "float64", order, swap) == math.pi


def test_int16_negative():
    """0xFFFE is -2 as int16 and 65534 as uint16 (two's complement)."""
    assert decode([0xFFFE], "int16") == -2
    assert decode([0xFFFE], "uint16") == 65534


def test_int16_byte_swap():
    """A byte-swapped register 0x0100 reads as 1."""
    assert decode([0x0100], "uint16", byte_swap=True) == 1


def test_int16_ignores_word_order():
    """Word order means nothing for a single register."""
    assert decode([0x8000], "int16", "little") == -32768


def test_int32_layouts():
    """-123456789 = 0xF8A432EB (two's complement) in ABCD, CDAB, BADC and DCBA."""
    cases = {
        "ABCD": [0xF8A4, 0x32EB],
        "CDAB": [0x32EB, 0xF8A4],
        "BADC": [0xA4F8, 0xEB32],
        "DCBA": [0xEB32, 0xA4F8],
    }
    for layout, regs in cases.items():
        order, swap = LAYOUTS_32[layout]
        assert decode(regs, "int32", order, swap) == -123456789, layout


def test_uint32_above_int_range():
    """4,000,000,000 = 0xEE6B2800 stays unsigned as uint32."""
    assert decode([0xEE6B, 0x2800], "uint32") == 4_000_000_000
    assert decode([0x2800, 0xEE6B], "uint32", "little") == 4_000_000_000


def test_decoder_at_offset_in_block():
    """A decoder reads its value at an offset inside a larger block."""
    block = BlockBytes([0, 0x3F80, 0x0000, 7])  # 1.0 = 0x3F800000 (IEEE 754)
    assert make_decoder("float32")(block, 1) == 1.0
    assert make_decoder("uint16")(block, 3) == 7


def test_decoder_past_block_end_raises():
    """Reading beyond the block is a DecodeError, not garbage."""
    with pytest.raises(DecodeError):
        make_decoder("float32")(BlockBytes([1, 2]), 1)


def test_wrong_register_count_raises():
    """decode() wants exactly the registers of one value."""
    with pytest.raises(DecodeError):
        decode([1, 2, 3], "float32")


def test_register_out_of_range_raises():
    """A value above 0xFFFF is not a register."""
    with pytest.raises(DecodeError):
        decode([0x10000], "uint16")


def test_unknown_type_raises():
    """An unknown type names the accepted ones."""
    with pytest.raises(DecodeError, match="float32"):
        decode([1], "float16")


def test_register_counts():
    """16-bit types take one register, 32-bit two, float64 four."""
    assert REGISTER_COUNT == {
        "int16": 1,
        "uint16": 1,
        "int32": 2,
        "uint32": 2,
        "float32": 2,
        "float64": 4,
    }


def test_layout_names():
    """Layout names follow the byte letters."""
    assert layout_name("float32", "little", True) == "DCBA"
    assert layout_name("float64", "little", False) == "GHEFCDAB"
    assert layout_name("int16", "little", True) == "BA"


def test_all_decodings_finds_every_layout():
    """all_decodings lists each 32-bit layout once per offset and finds 123456.0 in CDAB."""
    found = all_decodings(FLOAT32_123456["CDAB"])
    floats = [d for d in found if d.type == "float32"]
    assert [d.layout for d in floats] == ["ABCD", "CDAB", "BADC", "DCBA"]
    assert [d.layout for d in floats if d.value == 123456.0] == ["CDAB"]


def test_all_decodings_counts():
    """Four registers give 4x2 16-bit, 3x4 x 3 32-bit and 1x4 64-bit decodings."""
    found = all_decodings([1, 2, 3, 4])
    assert len(found) == 2 * 4 * 2 + 3 * 3 * 4 + 4


def test_nan_pattern_decodes_to_nan():
    """0x7FC00000 is a quiet NaN in IEEE 754 binary32."""
    assert math.isnan(decode([0x7FC0, 0x0000], "float32"))


# --- conditioning of decoded values (edge/sources/condition.py) ---


def _tag(**kw) -> ModbusTag:
    base = {"name": "t", "table": "holding", "address": 0, "unit": "bar", "reference": "gauge"}
    return ModbusTag(**(base | kw))


def test_scale_linear():
    """raw 16000 of 0..32000 -> 0..10 bar is 5 bar = 500 kPa."""
    value, quality = condition(_tag(scale=(0, 32000, 0, 10)), 16000)
    assert quality.good
    assert value == pytest.approx(5e5)


def test_scale_offset_range():
    """raw 0..27648 -> -1..9 bar: raw 13824 is 4 bar (linear interpolation)."""
    value, _ = condition(_tag(scale=(0, 27648, -1, 9)), 13824)
    assert value == pytest.approx(4e5)


def test_temperature_unit_to_kelvin():
    """185 degC is 458.15 K (0 degC = 273.15 K, ITS-90 convention)."""
    tag = ModbusTag(name="t", table="input", address=0, unit="degC")
    value, _ = condition(tag, 185)
    assert value == pytest.approx(458.15)


@pytest.mark.parametrize(
    ("micro_amps", "level", "reason"),
    [
        (3590, Level.BAD, SENSOR_FAULT),  # <= 3.6 mA: failure signal (NAMUR NE 43)
        (3600, Level.BAD, SENSOR_FAULT),  # exactly 3.6 mA counts as failure (NE 43)
        (3700, Level.UNCERTAIN, OUT_OF_RANGE),  # 3.6-3.8 mA: below measuring range (NE 43)
        (3800, Level.GOOD, None),  # 3.8 mA: lower end of the range (NE 43)
        (12000, Level.GOOD, None),
        (20500, Level.GOOD, None),  # 20.5 mA: upper end of the range (NE 43)
        (20600, Level.UNCERTAIN, OUT_OF_RANGE),  # 20.5-21 mA: above range (NE 43)
        (21000, Level.BAD, SENSOR_FAULT),  # >= 21 mA: failure signal (NE 43)
    ],
)
def test_ne43_limits(micro_amps, level, reason):
    """A 4-20 mA tag is judged by NAMUR NE 43 limits on its loop current."""
    tag = _tag(signal="4-20mA", scale=(4000, 20000, 0, 16))  # raw counts are microamps
    value, quality = condition(tag, micro_amps)
    assert quality.level is level
    assert quality.reason == reason
    assert math.isnan(value) is (level is Level.BAD)


def test_nan_and_inf_are_bad():
    """NaN and infinity are bad/not_a_number, never a number."""
    for raw in (math.nan, math.inf, -math.inf):
        value, quality = condition(_tag(), raw)
        assert quality.level is Level.BAD and quality.reason == NOT_A_NUMBER
        assert math.isnan(value)


def test_valid_range():
    """A value outside valid_range is bad/out_of_range."""
    tag = _tag(valid_range=(0, 20))
    assert condition(tag, 21)[1].reason == OUT_OF_RANGE
    assert condition(tag, 20)[1].good


def test_conditioner_reused_over_many_values():
    """One Conditioner gives each raw value its own result (loop check, range, units)."""
    tag = _tag(signal="4-20mA", scale=(4000, 20000, 0, 16), valid_range=(-1, 15))
    conditioner = Conditioner(tag)
    results = [conditioner(raw) for raw in (3000, 3700, 12000, 19500, 20600, 22000)]
    assert [q.level for _, q in results] == [
        Level.BAD,  # 3.0 mA: NE 43 failure
        Level.UNCERTAIN,  # 3.7 mA: under range (NE 43)
        Level.GOOD,  # 12 mA = 8 bar
        Level.BAD,  # 19.5 mA = 15.5 bar, beyond valid_range
        Level.BAD,  # 20.6 mA = 16.6 bar: NE 43 only uncertain, but beyond valid_range
        Level.BAD,  # 22 mA: NE 43 failure
    ]
    assert results[1][0] == pytest.approx(-0.3e5)  # 3.7 mA = -0.3 bar, kept as uncertain
    assert results[2][0] == pytest.approx(8e5)


def test_conditioner_refuses_flat_scale():
    """raw low = raw high would divide by zero: refused when the tag is set up."""
    with pytest.raises(ConfigError):
        Conditioner(_tag(scale=(5, 5, 0, 1)))


# --- many values from one block (BlockDecoder) ---


def test_block_decoder_mixed_layouts_and_overlaps():
    """One BlockDecoder returns every value, whatever its layout, overlaps included."""
    regs = [*FLOAT32_123456["ABCD"], 0xFFFE, *FLOAT32_123456["DCBA"], 0x0100]
    items = [
        (0, make_decoder("float32")),
        (2, make_decoder("int16")),
        (3, make_decoder("float32", "little", True)),
        (0, make_decoder("uint16")),  # overlaps the first float
        (5, make_decoder("uint16", byte_swap=True)),
        (2, make_decoder("uint16")),  # overlaps the int16
    ]
    assert BlockDecoder(items, 6)(regs) == [123456.0, -2, 123456.0, 0x47F1, 1, 65534]


def test_block_decoder_wrong_length_raises():
    """A reply of the wrong length is a DecodeError, never misaligned values."""
    with pytest.raises(DecodeError):
        BlockDecoder([(0, make_decoder("float32"))], 2)([1, 2, 3])


@settings(max_examples=200, deadline=None)
@given(
    type_=st.sampled_from(TYPES),
    word_order=st.sampled_from(["big", "little"]),
    byte_swap=st.booleans(),
    data=st.data(),
)
def test_round_trip_every_type_and_layout(type_, word_order, byte_swap, data):
    """Any value encoded with struct in any layout decodes back to itself."""
    bounds = {"int16": 15, "uint16": 16, "int32": 31, "uint32": 32}
    if type_ in bounds:
        bits = bounds[type_]
        lo = 0 if type_.startswith("u") else -(2**bits)
        value = data.draw(st.integers(lo, 2**bits - 1))
    else:
        width = 32 if type_ == "float32" else 64
        value = data.draw(st.floats(allow_nan=False, width=width))
    regs = encode(value, type_, word_order, byte_swap)
    assert decode(regs, type_, word_order, byte_swap) == value
    items = [(1, make_decoder(type_, word_order, byte_swap))]
    assert BlockDecoder(items, len(regs) + 2)([7, *regs, 9]) == [value]
