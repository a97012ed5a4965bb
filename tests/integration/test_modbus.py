"""ModbusSource against a real pymodbus TCP server on 127.0.0.1: decoding, conditioning,
exception handling and block planning on the wire."""

from __future__ import annotations

import math

import pytest

from edge.config import ModbusTcpSource
from edge.model import COMM_LOSS, NOT_A_NUMBER, OUT_OF_RANGE, SENSOR_FAULT, Level, Sample
from edge.sources.modbus import ModbusSource

from .modbus_server import ModbusTestServer, encode, modbus_server


def tcp_config(server: ModbusTestServer, tags: list[dict], **kw: object) -> ModbusTcpSource:
    fields: dict[str, object] = {
        "name": "boiler-plc",
        "protocol": "modbus-tcp",
        "host": "127.0.0.1",
        "port": server.port,
        "interval": "100 ms",
        "timeout": "300 ms",
        "retries": 0,
        "tags": tags,
    }
    return ModbusTcpSource(**(fields | kw))


def tag(name: str, address: int, type_: str = "uint16", **kw: object) -> dict:
    return {"name": name, "table": "holding", "address": address, "type": type_, "unit": "m"} | kw


def by_tag(samples: list[Sample]) -> dict[str, Sample]:
    return {s.tag: s for s in samples}


# Known register images. IEEE 754 binary32 123456.0 = 0x47F12000; binary64 pi =
# 0x400921FB54442D18; int32 -123456789 = 0xF8A432EB; uint32 4e9 = 0xEE6B2800
# (from memory; each agrees with Python's struct module).
KNOWN = {
    0: 0x47F1, 1: 0x2000,  # float32 ABCD
    2: 0x2000, 3: 0x47F1,  # float32 CDAB
    4: 0xF147, 5: 0x0020,  # float32 BADC
    6: 0x0020, 7: 0xF147,  # float32 DCBA
    8: 0x4009, 9: 0x21FB, 10: 0x5444, 11: 0x2D18,  # float64 ABCDEFGH
    12: 0x2D18, 13: 0x5444, 14: 0x21FB, 15: 0x4009,  # float64 GHEFCDAB
    16: 0x0940, 17: 0xFB21, 18: 0x4454, 19: 0x182D,  # float64 BADCFEHG
    20: 0x182D, 21: 0x4454, 22: 0xFB21, 23: 0x0940,  # float64 HGFEDCBA
    24: 0xFFFE,  # int16 -2 / uint16 65534
    25: 0x0100,  # uint16 1 byte-swapped
    26: 0xF8A4, 27: 0x32EB,  # int32 ABCD
    28: 0x32EB, 29: 0xF8A4,  # int32 CDAB
    30: 0xA4F8, 31: 0xEB32,  # int32 BADC
    32: 0xEB32, 33: 0xA4F8,  # int32 DCBA
    34: 0xEE6B, 35: 0x2800,  # uint32 ABCD
    36: 0x0028, 37: 0x6BEE,  # uint32 DCBA
}  # fmt: skip

KNOWN_TAGS = [
    tag("f_abcd", 0, "float32"),
    tag("f_cdab", 2, "float32", word_order="little"),
    tag("f_badc", 4, "float32", byte_swap=True),
    tag("f_dcba", 6, "float32", word_order="little", byte_swap=True),
    tag("d_abcdefgh", 8, "float64"),
    tag("d_ghefcdab", 12, "float64", word_order="little"),
    tag("d_badcfehg", 16, "float64", byte_swap=True),
    tag("d_hgfedcba", 20, "float64", word_order="little", byte_swap=True),
    tag("i16", 24, "int16"),
    tag("u16", 24, "uint16"),
    tag("u16_swapped", 25, "uint16", byte_swap=True),
    tag("i32_abcd", 26, "int32"),
    tag("i32_cdab", 28, "int32", word_order="little"),
    tag("i32_badc", 30, "int32", byte_swap=True),
    tag("i32_dcba", 32, "int32", word_order="little", byte_swap=True),
    tag("u32_abcd", 34, "uint32"),
    tag("u32_dcba", 36, "uint32", word_order="little", byte_swap=True),
]

EXPECTED = {
    "f_abcd": 123456.0,
    "f_cdab": 123456.0,
    "f_badc": 123456.0,
    "f_dcba": 123456.0,
    "d_abcdefgh": math.pi,
    "d_ghefcdab": math.pi,
    "d_badcfehg": math.pi,
    "d_hgfedcba": math.pi,
    "i16": -2.0,
    "u16": 65534.0,
    "u16_swapped": 1.0,
    "i32_abcd": -123456789.0,
    "i32_cdab": -123456789.0,
    "i32_badc": -123456789.0,
    "i32_dcba": -123456789.0,
    "u32_abcd": 4e9,
    "u32_dcba": 4e9,
}


@pytest.mark.asyncio
async def test_every_type_and_layout_over_the_wire():
    """Every type in every word/byte order decodes its known value from a real server."""
    async with modbus_server(holding=KNOWN) as server:
        source = ModbusSource(tcp_config(server, KNOWN_TAGS))
        samples = by_tag(await source.read_once())
        await source.close()
    assert {name: s.value for name, s in samples.items()} == EXPECTED
    assert all(s.quality.good for s in samples.values())
    assert len(source.reads) == 1  # 38 registers, one block read


@pytest.mark.asyncio
async def test_input_registers_use_function_code_4():
    """A tag in the input table is read with function code 4."""
    async with modbus_server(input={7: 0x3F80, 8: 0x0000}) as server:  # 1.0 = 0x3F800000
        source = ModbusSource(tcp_config(server, [tag("x", 7, "float32", table="input")]))
        (sample,) = await source.read_once()
        await source.close()
        assert sample.value == 1.0
        assert server.function_codes() == {4}


@pytest.mark.asyncio
async def test_scaling_and_units():
    """raw 16000 of 0..32000 -> 0..10 barg is 500,000 Pa gauge; 1850 of 0..10000 -> 0..1000
    degC is 458.15 K."""
    tags = [
        tag("drum_p", 0, "int16", unit="bar", reference="gauge", scale=[0, 32000, 0, 10]),
        tag("drum_t", 1, "int16", unit="degC", scale=[0, 10000, 0, 1000]),
    ]
    async with modbus_server(holding={0: 16000, 1: 1850}) as server:
        source = ModbusSource(tcp_config(server, tags))
        samples = by_tag(await source.read_once())
        await source.close()
    assert samples["drum_p"].value == pytest.approx(5e5)
    assert samples["drum_t"].value == pytest.approx(458.15)  # 0 degC = 273.15 K


@pytest.mark.asyncio
async def test_ne43_limits_over_the_wire():
    """4-20 mA tags read in microamps are judged by NAMUR NE 43 limits."""
    currents = {"fail_low": 3590, "under": 3700, "mid": 12000, "over": 20600, "fail_high": 21000}
    tags = [
        tag(name, i, unit="bar", reference="gauge", signal="4-20mA", scale=[4000, 20000, 0, 16])
        for i, name in enumerate(currents)
    ]
    registers = dict(enumerate(currents.values()))
    async with modbus_server(holding=registers) as server:
        source = ModbusSource(tcp_config(server, tags))
        s = by_tag(await source.read_once())
        await source.close()
    # NAMUR NE 43: <= 3.6 mA and >= 21 mA signal a failure; 3.8..20.5 mA is the range
    assert (s["fail_low"].quality.level, s["fail_low"].quality.reason) == (
        Level.BAD,
        SENSOR_FAULT,
    )
    assert (s["fail_high"].quality.level, s["fail_high"].quality.reason) == (
        Level.BAD,
        SENSOR_FAULT,
    )
    assert s["under"].quality.level is Level.UNCERTAIN
    assert s["over"].quality.level is Level.UNCERTAIN
    assert s["mid"].quality.good
    assert s["mid"].value == pytest.approx(8e5)  # 12 mA is mid-range: 8 bar
    assert math.isnan(s["fail_low"].value)


@pytest.mark.asyncio
async def test_garbage_values_are_bad_not_numbers():
    """NaN, infinity and out-of-range values come back bad; the good tag stays good."""
    registers = {
        0: 0x7FC0, 1: 0x0000,  # float32 quiet NaN (IEEE 754)
        2: 0x7F80, 3: 0x0000,  # float32 +infinity (IEEE 754)
        4: 0x7FF0, 5: 0, 6: 0, 7: 0,  # float64 +infinity (IEEE 754)
        8: 30000,  # int16 beyond valid_range
        9: 42,
    }  # fmt: skip
    tags = [
        tag("nan", 0, "float32"),
        tag("inf", 2, "float32"),
        tag("inf64", 4, "float64"),
        tag("wild", 8, "int16", valid_range=[0, 1000]),
        tag("fine", 9),
    ]
    async with modbus_server(holding=registers) as server:
        source = ModbusSource(tcp_config(server, tags))
        s = by_tag(await source.read_once())
        await source.close()
    for name in ("nan", "inf", "inf64"):
        assert s[name].quality.reason == NOT_A_NUMBER and not s[name].usable
        assert math.isnan(s[name].value)
    assert s["wild"].quality.reason == OUT_OF_RANGE and not s["wild"].usable
    assert s["fine"].value == 42.0 and s["fine"].quality.good


@pytest.mark.asyncio
async def test_illegal_address_does_not_blank_the_others():
    """Exception 02 on one tag's address leaves the other tags of the block good, in the
    same cycle, and the next cycle reads that tag alone."""
    registers = {a: 100 + a for a in range(21) if a != 10}  # register 10 does not exist
    tags = [tag(f"t{a}", a) for a in (0, 5, 10, 15, 20)]
    async with modbus_server(holding=registers) as server:
        source = ModbusSource(tcp_config(server, tags))
        assert len(source.reads) == 1
        first = by_tag(await source.read_once())
        server.requests.clear()
        second = by_tag(await source.read_once())
        await source.close()
        second_requests = [(r.address, r.count) for r in server.requests]
    for s in (first, second):
        assert {n: x.value for n, x in s.items() if n != "t10"} == {
            "t0": 100.0,
            "t5": 105.0,
            "t15": 115.0,
            "t20": 120.0,
        }
        assert s["t10"].quality.level is Level.BAD
        assert s["t10"].quality.reason == "illegal_data_address"
    assert second_requests == [(0, 6), (10, 1), (15, 6)]
    assert source.plan.alone == frozenset({"t10"})


@pytest.mark.asyncio
async def test_illegal_address_in_bridged_gap_is_learnt():
    """A missing register inside a bridged gap costs extra reads once, then never again."""
    registers = {0: 1, 1: 2, 2: 3, 5: 6, 6: 7}  # 3 and 4 do not exist
    tags = [tag("a", 0), tag("b", 2), tag("c", 5), tag("d", 6)]
    async with modbus_server(holding=registers) as server:
        source = ModbusSource(tcp_config(server, tags))
        first = by_tag(await source.read_once())
        errors_after_first = dict(source.health.errors)
        second = by_tag(await source.read_once())
        await source.close()
    assert [first[n].value for n in "abcd"] == [1.0, 3.0, 6.0, 7.0]
    assert [second[n].value for n in "abcd"] == [1.0, 3.0, 6.0, 7.0]
    assert [(r.start, r.count) for r in source.reads] == [(0, 3), (5, 2)]
    assert source.health.errors == errors_after_first  # no new exception in cycle two


@pytest.mark.parametrize(
    ("code", "reason"),
    [
        (0x01, "illegal_function"),  # Modbus application protocol v1.1b3, section 7
        (0x03, "illegal_data_value"),
        (0x04, "device_failure"),
        (0x06, "device_busy"),
        (0x0A, "gateway_path_unavailable"),
        (0x0B, "gateway_no_response"),
    ],
)
@pytest.mark.asyncio
async def test_exception_codes_become_quality_reasons(code, reason):
    """A Modbus exception response makes the block's tags bad with the code's reason."""
    async with modbus_server(holding={0: 1, 1: 2}) as server:
        server.fail_on("holding", 1, code)
        source = ModbusSource(tcp_config(server, [tag("a", 0), tag("b", 1)]))
        samples = await source.read_once()
        await source.close()
    assert {s.quality.reason for s in samples} == {reason}
    assert source.health.errors == {f"exception_{code:02x}": 1}
    assert source.health.up is False


@pytest.mark.asyncio
async def test_several_unit_ids_on_one_connection():
    """Tags of two unit ids behind one gateway are read from their own units."""
    devices = {1: {"holding": {0: 11}}, 2: {"holding": {0: 22}, "input": {3: 33}}}
    tags = [tag("one", 0), tag("two", 0, unit_id=2), tag("two_in", 3, unit_id=2, table="input")]
    async with modbus_server(devices=devices) as server:
        source = ModbusSource(tcp_config(server, tags))
        s = by_tag(await source.read_once())
        await source.close()
        units = sorted((r.unit, r.function_code) for r in server.requests)
    assert (s["one"].value, s["two"].value, s["two_in"].value) == (11.0, 22.0, 33.0)
    assert units == [(1, 3), (2, 3), (2, 4)]


@pytest.mark.asyncio
async def test_one_sample_per_tag_in_config_order():
    """Every cycle gives one Sample per tag, in config order, even with failures."""
    tags = [tag("z", 9), tag("a", 0), tag("missing", 50)]
    async with modbus_server(holding={0: 1, 9: 2}) as server:
        source = ModbusSource(tcp_config(server, tags))
        samples = await source.read_once()
        await source.close()
    assert [s.tag for s in samples] == ["z", "a", "missing"]


@pytest.mark.asyncio
async def test_health_figures_after_good_cycle():
    """A good cycle sets up, delivered, one read observation and no errors."""
    async with modbus_server(holding={0: 1}) as server:
        source = ModbusSource(tcp_config(server, [tag("a", 0)]))
        await source.read_once()
        await source.close()
    h = source.health
    assert (h.up, h.delivered, h.reads, h.errors) == (True, True, 1, {})
    assert 0 < h.read_sum < 1.0 and sum(h.bucket_counts) == 1


@pytest.mark.asyncio
async def test_values_follow_the_server():
    """A register change on the server shows in the next cycle."""
    async with modbus_server(holding=dict(enumerate(encode(1.5, "float32")))) as server:
        source = ModbusSource(tcp_config(server, [tag("x", 0, "float32")]))
        assert (await source.read_once())[0].value == 1.5
        await server.set_registers("holding", 0, encode(-7.25, "float32"))
        assert (await source.read_once())[0].value == -7.25
        await source.close()


@pytest.mark.asyncio
async def test_refused_connection_is_comm_loss():
    """Nothing listening: every tag bad/comm_loss, the error counted as connect."""
    async with modbus_server(holding={0: 1}) as server:
        config = tcp_config(server, [tag("a", 0)])
    source = ModbusSource(config)  # the server is gone now
    (sample,) = await source.read_once()
    assert sample.quality.reason == COMM_LOSS
    assert source.health.errors == {"connect": 1}
    assert source.health.up is False


def test_fast_sample_equals_plain_constructor():
    """The hot-path Sample builder gives an object equal to Sample(...), still frozen."""
    from edge.model import GOOD, bad
    from edge.sources.modbus import _new_sample

    for args in (("a", 1.5, GOOD, 10.0, 11.0, None), ("b", math.nan, bad("x"), 1.0, 2.0, 3.0)):
        fast, plain = _new_sample(*args), Sample(*args)
        assert type(fast) is Sample
        assert repr(fast) == repr(plain)
    with pytest.raises(AttributeError):
        fast.value = 2.0  # type: ignore[misc]
