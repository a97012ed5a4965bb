"""The simulator's servers, read with real clients: Modbus TCP registers in their mixed
encodings, OPC UA values with status codes and source timestamps, the control endpoint and
what each fault scenario looks like on the wire."""

from __future__ import annotations

import asyncio
import time

import pytest
import pytest_asyncio
from asyncua import Client
from pymodbus.client import AsyncModbusTcpClient

from edge.sim.opcua_server import OpcUaPlantServer
from edge.sim.runner import SimSettings, Simulator
from tests.integration.simkit import free_port, get_json, put_json

pytestmark = pytest.mark.asyncio(loop_scope="module")

F32 = AsyncModbusTcpClient.DATATYPE.FLOAT32
I16 = AsyncModbusTcpClient.DATATYPE.INT16


@pytest_asyncio.fixture(scope="module", loop_scope="module")
async def sim():
    settings = SimSettings(
        modbus_port=free_port(), opcua_port=free_port(), control_port=free_port(), speed=4.0
    )
    async with Simulator(settings) as s:
        yield s


@pytest_asyncio.fixture(loop_scope="module")
async def normal(sim):
    """Each test starts from the normal scenario."""
    sim.set_scenario("normal")
    await asyncio.sleep(0.3)
    yield sim
    sim.set_scenario("normal")


async def _modbus(sim: Simulator) -> AsyncModbusTcpClient:
    client = AsyncModbusTcpClient(
        "127.0.0.1", port=sim.settings.modbus_port, timeout=1, retries=0, reconnect_delay=0
    )
    assert await client.connect()
    return client


async def _wait(probe, timeout: float, what: str):
    deadline = time.monotonic() + timeout
    last = None
    while time.monotonic() < deadline:
        last = await probe()
        if last:
            return last
        await asyncio.sleep(0.1)
    raise AssertionError(f"timed out waiting for {what}; last {last!r}")


async def test_modbus_floats_in_both_word_orders(normal):
    """Holding 0 (big word order) and 2 (little) decode to the plant's readings."""
    client = await _modbus(normal)
    try:
        r = await client.read_holding_registers(0, count=4, device_id=1)
        readings = normal.plant.readings
        sh_p = client.convert_from_registers(r.registers[0:2], F32, word_order="big")
        sh_t = client.convert_from_registers(r.registers[2:4], F32, word_order="little")
    finally:
        client.close()
    # the plant moves on between the read and now: compare with what it shows by now
    assert sh_p == pytest.approx(readings.sh_p, abs=0.05)
    assert sh_t == pytest.approx(readings.sh_t, abs=1.0)
    assert 10.0 < sh_p < 12.0 and 225.0 < sh_t < 250.0


async def test_modbus_drum_pressure_as_4_20_ma_counts(normal):
    """Input 0 carries transmitter A as 0..27648 counts for 4..20 mA: about 15 mA."""
    client = await _modbus(normal)
    try:
        r = await client.read_input_registers(0, count=2, device_id=1)
    finally:
        client.close()
    counts = client.convert_from_registers(r.registers[0:1], I16)
    assert 4.0 + 16.0 * counts / 27648 == pytest.approx(15.0, abs=0.3)
    assert r.registers[1] / 10.0 == pytest.approx(188.0, abs=1.0)  # drum_t, 0.1 degC per count


async def test_transmitter_failure_sends_counts_below_4_ma(normal):
    """In transmitter-failure input 0 reads -864 counts: 3.5 mA."""
    normal.set_scenario("transmitter-failure")
    client = await _modbus(normal)

    async def counts():
        r = await client.read_input_registers(0, count=1, device_id=1)
        value = client.convert_from_registers(r.registers, I16)
        return value if value == -864 else None

    try:
        assert await _wait(counts, 3.0, "-864 counts") == -864
    finally:
        client.close()


async def test_opcua_values_carry_status_and_source_timestamp(normal):
    """The gateway's barometer is Good, about 1008 hPa, stamped within seconds of now."""
    async with Client(normal.opcua.endpoint, timeout=5) as client:
        dv = await client.get_node("ns=2;s=Site.Barometer").read_data_value(
            raise_on_bad_status=False
        )
    assert dv.StatusCode.is_good()
    assert dv.Value.Value == pytest.approx(1008.0, abs=3.0)
    assert abs(dv.SourceTimestamp.timestamp() - time.time()) < 3.0


async def test_barometer_stale_freezes_value_and_timestamp(normal):
    """In barometer-stale the barometer's source timestamp stops; the header's goes on."""
    normal.set_scenario("barometer-stale")
    async with Client(normal.opcua.endpoint, timeout=5) as client:
        baro = client.get_node("ns=2;s=Site.Barometer")
        header = client.get_node("ns=2;s=Header.Pressure")
        await asyncio.sleep(0.5)  # let the last publication before the switch land
        b1, h1 = await baro.read_data_value(), await header.read_data_value()
        await asyncio.sleep(1.0)
        b2, h2 = await baro.read_data_value(), await header.read_data_value()
    assert b2.SourceTimestamp == b1.SourceTimestamp and b2.Value.Value == b1.Value.Value
    assert h2.SourceTimestamp > h1.SourceTimestamp


async def test_gauge_as_absolute_lowers_transmitter_b_by_one_barometer(normal):
    """Transmitter B drops by about 1.008 bar when it reads gauge."""
    async with Client(normal.opcua.endpoint, timeout=5) as client:
        node = client.get_node("ns=2;s=Drum.PressureB")
        before = (await node.read_data_value()).Value.Value
        normal.set_scenario("gauge-as-absolute")
        await asyncio.sleep(0.6)
        after = (await node.read_data_value()).Value.Value
    assert before - after == pytest.approx(1.008, abs=0.05)


async def test_link_drop_closes_and_reopens_the_plc_port(normal):
    """In link-drop the Modbus port refuses connections, and accepts them again after."""
    normal.set_scenario("link-drop")
    port = normal.settings.modbus_port

    async def refused():
        try:
            _, writer = await asyncio.open_connection("127.0.0.1", port)
        except OSError:
            return True
        writer.close()
        return False

    assert await _wait(refused, 4.0, "the PLC port to close")
    normal.set_scenario("normal")  # a scenario switch restores the link at once

    async def accepted():
        return not await refused()

    assert await _wait(accepted, 2.0, "the PLC port to reopen")
    client = await _modbus(normal)
    try:
        r = await client.read_holding_registers(0, count=2, device_id=1)
        assert 10.0 < client.convert_from_registers(r.registers, F32) < 12.0  # values are back
    finally:
        client.close()


async def test_control_endpoint_switches_scenario(normal):
    """PUT /scenario switches; GET /scenario reports it with every scenario's summary."""
    url = normal.settings.control_url + "/scenario"
    status, body = await asyncio.to_thread(put_json, url, {"name": "load-swing"})
    assert status == 200 and body["scenario"] == "load-swing"
    assert normal.scenario.name == "load-swing"
    listing = await asyncio.to_thread(get_json, url)
    assert listing["scenario"] == "load-swing" and len(listing["scenarios"]) == 7


async def test_control_endpoint_refuses_an_unknown_scenario(normal):
    """An unknown name is a 400 with the JSON error shape, and nothing changes."""
    url = normal.settings.control_url + "/scenario"
    status, body = await asyncio.to_thread(put_json, url, {"name": "meltdown"})
    assert status == 400
    assert body["error"] == "unknown scenario" and "load-swing" in body["detail"]
    assert normal.scenario.name == "normal"


async def test_state_endpoint_shows_readings_and_true_plant(normal):
    """GET /state shows simulated time running at the set speed, readings and the plant."""
    url = normal.settings.control_url + "/state"
    a = await asyncio.to_thread(get_json, url)
    await asyncio.sleep(1.0)
    b = await asyncio.to_thread(get_json, url)
    assert 2.0 < b["t"] - a["t"] < 7.0  # speed 4: about 4 simulated seconds per second
    assert b["readings"]["drum_p_ma"] == pytest.approx(15.0, abs=0.3)
    assert b["plant"]["drum_p"] == pytest.approx(12e5, abs=0.3e5)


async def test_opcua_node_waits_for_initial_data_until_first_update():
    """A gateway node is BadWaitingForInitialData until its first reading, then Good."""
    server = OpcUaPlantServer("127.0.0.1", free_port())
    await server.start()
    try:
        async with Client(server.endpoint, timeout=5) as client:
            node = client.get_node("ns=2;s=Header.Temperature")
            first = await node.read_data_value(raise_on_bad_status=False)
            await server.update({"hdr_t": 236.5}, 1_700_000_000.0)
            second = await node.read_data_value(raise_on_bad_status=False)
    finally:
        await server.stop()
    assert first.StatusCode.name == "BadWaitingForInitialData"
    assert second.StatusCode.is_good() and second.Value.Value == pytest.approx(236.5)
    assert second.SourceTimestamp.timestamp() == pytest.approx(1_700_000_000.0)
