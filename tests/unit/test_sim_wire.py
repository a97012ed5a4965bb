"""The simulator's wire layout: register encoding, and the demo config agreeing with it."""

from __future__ import annotations

from pathlib import Path

import pytest
from pymodbus.client.mixin import ModbusClientMixin

from edge.config import load_config
from edge.sim import opcua_server
from edge.sim.modbus_server import REGISTERS, Register, encode
from edge.sim.plant import ZERO_CELSIUS, Plant
from edge.sources.condition import condition
from edge.sources.decode import decode

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "config" / "demo.yaml"
F32 = ModbusClientMixin.DATATYPE.FLOAT32


def convert(words, word_order):
    return ModbusClientMixin.convert_from_registers(words, F32, word_order=word_order)


def test_float32_big_word_order():
    """Big word order puts the high word first (pymodbus's own decoder agrees)."""
    reg = Register(reading="x", table="holding", address=0, type="float32", word_order="big")
    words = encode(reg, 10.5)
    assert words == [0x4128, 0x0000]  # IEEE 754: 10.5 = 0x41280000
    assert convert(words, "big") == 10.5  # cross-check: pymodbus convert_from_registers


def test_float32_little_word_order():
    """Little word order sends the low word first."""
    reg = Register(reading="x", table="holding", address=0, type="float32", word_order="little")
    assert encode(reg, 10.5) == [0x0000, 0x4128]
    assert convert(encode(reg, 238.25), "little") == 238.25  # cross-check: pymodbus


def test_float32_byte_swap_swaps_inside_each_word():
    """Byte swap exchanges the two bytes of every register."""
    reg = Register(reading="x", table="holding", address=0, type="float32", byte_swap=True)
    assert encode(reg, 10.5) == [0x2841, 0x0000]


def test_int16_loop_current_below_4_ma_goes_negative():
    """3.5 mA on a 0..27648 card for 4..20 mA is -864 counts, sent as two's complement."""
    reg = REGISTERS[0]
    assert reg.reading == "drum_p_ma"
    words = encode(reg, 3.5)
    assert words == [0x10000 - 864]
    assert ModbusClientMixin.convert_from_registers(words, ModbusClientMixin.DATATYPE.INT16) == -864


def test_int16_clamps_at_its_range():
    """A value beyond the type's range saturates instead of wrapping."""
    reg = Register(reading="x", table="input", address=0, type="int16", scale=(0, 10, 0, 1))
    assert encode(reg, 1e6) == [32767]


def test_uint16_scaled():
    """uint16 0..65535 for 0..250 degC: 104 degC is 27263 counts."""
    reg = Register(reading="x", table="input", address=0, type="uint16", scale=(0, 65535, 0, 250))
    assert encode(reg, 104.0) == [round(104.0 / 250 * 65535)]


def test_packaged_demo_config_is_the_repository_one():
    """The demo config shipped in the package is byte for byte config/demo.yaml."""
    packaged = ROOT / "edge" / "sim" / "demo.yaml"
    assert packaged.read_text(encoding="utf-8") == DEMO.read_text(encoding="utf-8")


@pytest.fixture(scope="module")
def demo():
    return load_config(str(DEMO))


def _expected_si(reading: str, value: float) -> float:
    """What the monitor should make of a reading: SI in the tag's own reference."""
    if reading == "drum_p_ma":
        return (value - 4.0) / 16.0 * 16e5  # 0..16 barg over 4..20 mA
    if reading.endswith("_t"):
        return value + ZERO_CELSIUS
    if reading in ("cond_p", "main_dp"):
        return value * 1e3  # kPa vacuum, kPa differential
    if reading == "vortex_q":
        return value / 3600.0  # m3/h
    return value * 1e5  # bar gauge


def test_demo_config_decodes_every_register_to_the_plant_reading(demo):
    """Each Modbus tag of the demo config, decoded and conditioned by the monitor's own code,
    gives back the simulator's reading in SI (to the register's resolution)."""
    plant = Plant(seed=1)
    plant.step(0.1)
    readings = plant.readings.as_dict()
    tags = {(t.table, t.address): t for t in demo.sources[0].tags}
    assert len(tags) == len(REGISTERS)
    for reg in REGISTERS:
        tag = tags[(reg.table, reg.address)]
        assert (tag.type, tag.word_order, tag.byte_swap) == (
            reg.type,
            reg.word_order,
            reg.byte_swap,
        )
        raw = decode(encode(reg, readings[reg.reading]), tag.type, tag.word_order, tag.byte_swap)
        si, quality = condition(tag, raw)
        assert quality.good, tag.name
        assert si == pytest.approx(_expected_si(reg.reading, readings[reg.reading]), abs=60.0), (
            tag.name
        )


def test_demo_config_nodes_are_the_gateway_nodes(demo):
    """Every OPC UA tag of the demo config names a node the simulated gateway serves."""
    served = {f"ns=2;s={n.node_id}" for n in opcua_server.NODES}
    assert {t.node for t in demo.sources[1].tags} == served


def test_demo_config_uses_loopback_ports_away_from_the_defaults(demo):
    """The demo serves Modbus on 15020 and OPC UA on 14840, the API on 127.0.0.1:9847."""
    assert (demo.sources[0].host, demo.sources[0].port) == ("127.0.0.1", 15020)
    assert demo.sources[1].endpoint.startswith("opc.tcp://127.0.0.1:14840/")
    assert demo.http.listen == "127.0.0.1:9847"


def test_demo_config_passes_check(capsys):
    """``steam-edge check -c config/demo.yaml`` accepts the demo config."""
    from edge.cli import main

    assert main(["check", "-c", str(DEMO)]) == 0
    assert "kestrel-mill-dyeworks" in capsys.readouterr().out
