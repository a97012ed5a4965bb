"""End to end: a real Modbus server -> `steam-edge run` as a subprocess -> /metrics, checked
against an independent IF97 computation; the live barometer and its fallback; logs."""

from __future__ import annotations

import asyncio
import json
import math

import pytest
from CoolProp.CoolProp import PropsSI

from tests.integration.modbus_server import encode, modbus_server
from tests.integration.servicekit import (
    BARO,
    TOKEN,
    ServiceProcess,
    metric,
    metrics_text,
    registers,
    wait_for,
    write_config,
)

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

DRUM_BARG, DRUM_C, BARO_KPA = 9.0, 190.0, 97.0  # exact in float32


def _tsat_coolprop(p_abs: float) -> float:
    """Saturation temperature (K), independent of the code under test: CoolProp IF97."""
    return PropsSI("T", "P", p_abs, "Q", 0, "IF97::Water")


async def _drum_series(url: str, origin: str) -> str:
    async def ready() -> str | None:
        text = await metrics_text(url)
        have = metric(text, "steamedge_barometric_pressure_pascals", origin=origin)
        drum = metric(text, "steamedge_superheat_kelvin", point="drum")
        return text if have is not None and drum is not None else None

    return await wait_for(ready, timeout=30.0, step=0.2)


async def _service(tmp_path, port: int):
    config = write_config(tmp_path / "edge.yaml", port)
    service = ServiceProcess(config)
    url = await asyncio.to_thread(lambda: service.url)
    return service, url


async def test_metrics_match_coolprop_with_live_barometer(tmp_path):
    """Gauge pressure + live barometer tag: absolute pressure, Tsat and superheat on /metrics
    agree with CoolProp's IF97 backend within 0.01 K."""
    regs = registers(drum_barg=DRUM_BARG, drum_c=DRUM_C, baro_kpa=BARO_KPA)
    async with modbus_server(holding=regs) as plc:
        service, url = await _service(tmp_path, plc.port)
        try:
            text = await _drum_series(url, "tag")
        finally:
            assert await asyncio.to_thread(service.stop) == 0
    p_abs = DRUM_BARG * 1e5 + BARO_KPA * 1e3  # absolute = gauge + barometric
    tsat = _tsat_coolprop(p_abs)
    assert metric(text, "steamedge_barometric_pressure_pascals", origin="tag") == 97_000.0
    assert metric(text, "steamedge_pressure_absolute_pascals", point="drum") == pytest.approx(
        p_abs, abs=1e-6
    )
    tsat_c = metric(text, "steamedge_saturation_temperature_celsius", point="drum")
    assert tsat_c is not None and abs(tsat_c - (tsat - 273.15)) < 0.01  # CoolProp IF97 backend
    superheat = metric(text, "steamedge_superheat_kelvin", point="drum")
    assert superheat is not None and abs(superheat - (DRUM_C + 273.15 - tsat)) < 0.01
    assert metric(text, "steamedge_temperature_celsius", point="drum") == pytest.approx(DRUM_C)
    assert metric(text, "steamedge_point_quality", point="drum") == 2


async def test_bad_barometer_tag_falls_back_with_its_origin(tmp_path):
    """When the barometer tag goes bad, the configured fixed value is used and labelled."""
    regs = registers(drum_barg=DRUM_BARG, drum_c=DRUM_C, baro_kpa=BARO_KPA)
    async with modbus_server(holding=regs) as plc:
        service, url = await _service(tmp_path, plc.port)
        try:
            await _drum_series(url, "tag")
            await plc.set_registers("holding", BARO, encode(math.nan, "float32"))
            text = await _drum_series(url, "fixed")
        finally:
            assert await asyncio.to_thread(service.stop) == 0
    assert metric(text, "steamedge_barometric_pressure_pascals", origin="tag") is None
    assert metric(text, "steamedge_barometric_pressure_pascals", origin="fixed") == 101_325.0
    p_abs = DRUM_BARG * 1e5 + 101_325.0
    assert metric(text, "steamedge_pressure_absolute_pascals", point="drum") == pytest.approx(
        p_abs, abs=1e-6
    )
    superheat = metric(text, "steamedge_superheat_kelvin", point="drum")
    # CoolProp IF97 backend, at the fallback barometric pressure
    assert (
        superheat is not None and abs(superheat - (DRUM_C + 273.15 - _tsat_coolprop(p_abs))) < 0.01
    )


async def test_logs_are_json_lines_with_advisory_notice_and_no_secret(tmp_path):
    """Every stdout line is one JSON event; the advisory notice is logged and the banner is
    on stderr; the API token never appears."""
    async with modbus_server(holding=registers()) as plc:
        service, _ = await _service(tmp_path, plc.port)
        await asyncio.to_thread(service.wait_event, "started")
        assert await asyncio.to_thread(service.stop) == 0
    events = [json.loads(line) for line in service.lines]  # every line parses
    assert all("event" in e and "timestamp" in e for e in events)
    notice = next(e for e in events if e["event"] == "advisory_only")
    assert "advisory only" in notice["notice"]
    assert any("ADVISORY ONLY" in line for line in service.stderr)
    everything = "\n".join(service.lines + service.stderr)
    assert TOKEN not in everything
    started = next(e for e in events if e["event"] == "started")
    assert started["api_writes"] == "enabled"


async def test_bad_config_exits_2_with_readable_lines(tmp_path):
    """A config with a mistake: exit 2, one line per problem naming the file, no traceback."""
    config = tmp_path / "edge.yaml"
    write_config(config, 1)
    config.write_text(config.read_text().replace("site:", "sitee:"))
    service = ServiceProcess(config)
    assert await asyncio.to_thread(service.proc.wait, 60) == 2
    service.stop()
    err = "\n".join(service.stderr)
    assert "edge.yaml" in err and "Traceback" not in err


OPCUA_SOURCE = """\
  - name: turbine-opcua
    protocol: opcua
    endpoint: {endpoint}
    interval: 200 ms
    tags:
      - {{name: hdr_p, node: "{p_node}", unit: bar, reference: gauge}}
      - {{name: hdr_t, node: "{t_node}", unit: degC}}
"""


async def test_opcua_and_modbus_sources_feed_one_point_set(tmp_path):
    """An OPC UA header (gauge bar) uses the live barometer read over Modbus; its Tsat and
    superheat on /metrics agree with CoolProp's IF97 backend within 0.01 K. Killing the
    Modbus server (the barometer's source) brings the fixed fallback, labelled with its
    origin, while the OPC UA source keeps delivering."""
    from tests.integration.opcua_server import PlantServer

    plant = PlantServer(nodes={"Header.Pressure": 40.0, "Header.Temperature": 400.0})
    await plant.start()
    try:
        async with modbus_server(holding=registers(baro_kpa=BARO_KPA)) as plc:
            config = write_config(tmp_path / "edge.yaml", plc.port)
            opcua = OPCUA_SOURCE.format(
                endpoint=plant.url,
                p_node=plant.node_id("Header.Pressure"),
                t_node=plant.node_id("Header.Temperature"),
            )
            text = config.read_text().replace("points:", opcua + "points:", 1)
            text = text.replace(
                "points:\n",
                "points:\n  - {name: header, pressure: hdr_p, temperature: hdr_t,"
                " state: superheated}\n",
                1,
            )
            config.write_text(text)
            service = ServiceProcess(config)
            try:
                url = await asyncio.to_thread(lambda: service.url)

                def header_with(origin: str):
                    async def ready() -> str | None:
                        body = await metrics_text(url)
                        found = metric(body, "steamedge_superheat_kelvin", point="header")
                        have = metric(body, "steamedge_barometric_pressure_pascals", origin=origin)
                        return body if found is not None and have is not None else None

                    return ready

                body = await wait_for(header_with("tag"), timeout=30.0, step=0.2)
                await plc.stop()  # the barometer's PLC is gone
                killed = await wait_for(header_with("fixed"), timeout=30.0, step=0.2)
            finally:
                assert await asyncio.to_thread(service.stop) == 0
    finally:
        await plant.stop()
    p_abs = 40.0e5 + BARO_KPA * 1e3  # gauge over OPC UA + barometer over Modbus
    tsat = _tsat_coolprop(p_abs)
    assert metric(body, "steamedge_pressure_absolute_pascals", point="header") == pytest.approx(
        p_abs, abs=1e-6
    )
    tsat_c = metric(body, "steamedge_saturation_temperature_celsius", point="header")
    assert tsat_c is not None and abs(tsat_c - (tsat - 273.15)) < 0.01  # CoolProp IF97 backend
    superheat = metric(body, "steamedge_superheat_kelvin", point="header")
    assert superheat is not None and abs(superheat - (400.0 + 273.15 - tsat)) < 0.01
    assert metric(body, "steamedge_source_up", source="turbine-opcua") == 1
    # after the kill: the fixed 101.325 kPa, and the OPC UA point computed with it
    assert metric(killed, "steamedge_barometric_pressure_pascals", origin="tag") is None
    assert metric(killed, "steamedge_barometric_pressure_pascals", origin="fixed") == 101_325.0
    p_fallback = 40.0e5 + 101_325.0
    assert metric(killed, "steamedge_pressure_absolute_pascals", point="header") == (
        pytest.approx(p_fallback, abs=1e-6)
    )
    superheat = metric(killed, "steamedge_superheat_kelvin", point="header")
    # CoolProp IF97 backend, at the fallback barometric pressure
    assert superheat is not None
    assert abs(superheat - (400.0 + 273.15 - _tsat_coolprop(p_fallback))) < 0.01
    assert metric(killed, "steamedge_source_up", source="boiler-plc") == 0
    assert metric(killed, "steamedge_source_up", source="turbine-opcua") == 1


async def test_console_log_format_is_for_humans(tmp_path):
    """`--log-format console`: readable key=value lines, not JSON, and still no secret."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        service = ServiceProcess(config, None, "--log-format", "console")

        def started() -> str | None:
            return next((x for x in service.lines if " started " in x), None)

        try:
            line = await wait_for(lambda: started() or service.proc.poll() is not None, 30.0)
            assert line is not True, "\n".join(service.lines + service.stderr)
        finally:
            assert await asyncio.to_thread(service.stop) == 0
    assert "api_writes=enabled" in line and "site=riverside-laundry" in line
    assert service.events() == []  # no line is a JSON object
    assert any(" stopped " in x for x in service.lines)
    assert TOKEN not in "\n".join(service.lines + service.stderr)
