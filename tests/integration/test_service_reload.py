"""Reload through POST /api/v1/reload, and fault isolation between sources, on an in-process
monitor with real Modbus servers."""

from __future__ import annotations

import pytest

from tests.integration.modbus_server import modbus_server, silent_server
from tests.integration.servicekit import (
    auth,
    metric,
    metrics_text,
    post,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio

ALARM = "drum-superheat-low"
HP_ALARM = """\
  - name: hp-superheat-low
    signal: hp_header.superheat
    low: 20 K
    priority: high
"""


@pytest.fixture(autouse=True)
def _token(token_env):
    """The test API token in the environment for every test here."""


async def test_valid_reload_adds_alarm_and_keeps_standing_state(tmp_path):
    """A valid config swaps the alarms; one with the same name keeps its state and since."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.alarm_states[ALARM].state == "unacknowledged")
            since = m.alarm_states[ALARM].since
            write_config(config, plc.port, extra_alarm=HP_ALARM)
            status, body = await post(m.url + "/api/v1/reload", None, auth())
            assert status == 200 and body["status"] == "reloaded"
            assert "hp-superheat-low" in m.alarm_states
            assert m.alarm_states[ALARM].state == "unacknowledged"
            assert m.alarm_states[ALARM].since == since
            assert body["sources_restarted"] == []  # the source did not change


async def test_invalid_reload_is_422_and_old_config_keeps_running(tmp_path):
    """An invalid config answers 422 listing the problems; nothing changes."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.alarm_states[ALARM].state == "unacknowledged")
            config.write_text(config.read_text().replace("low: 5 K", "low: 5 bananas"))
            status, body = await post(m.url + "/api/v1/reload", None, auth())
            assert status == 422 and body["error"] == "invalid_config"
            assert any("alarms[0]" in p for p in body["problems"])
            assert m.reloads == {"ok": 0, "rejected": 1}
            assert m.alarm_states[ALARM].state == "unacknowledged"
            assert m.alive()


async def test_reload_restarts_a_changed_source(tmp_path):
    """A source whose settings changed is restarted and reads from its new server."""
    async with (
        modbus_server(holding=registers(drum_barg=9.0)) as first,
        modbus_server(holding=registers(drum_barg=4.0)) as second,
    ):
        config = write_config(tmp_path / "edge.yaml", first.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.points.get("drum") and m.points["drum"].quality.good)
            write_config(config, second.port)
            status, body = await post(m.url + "/api/v1/reload", None, auth())
            assert status == 200 and body["sources_restarted"] == ["boiler-plc"]
            # 4 barg + 97 kPa barometer tag = 497 kPa absolute
            await wait_for(
                lambda: m.points["drum"].get("pressure").value == pytest.approx(497_000.0)
            )


async def test_reload_without_token_is_401(tmp_path):
    """POST /api/v1/reload needs the token like every write."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            status, _ = await post(m.url + "/api/v1/reload")
            assert status == 401 and m.reloads == {"ok": 0, "rejected": 0}


SECOND_SOURCE = """\
  - name: annex-plc
    protocol: modbus-tcp
    host: 127.0.0.1
    port: {port}
    interval: 200 ms
    timeout: 300 ms
    tags:
      - {{name: annex_p, table: holding, address: 0, type: float32, unit: bar,
         reference: gauge}}
"""


async def test_a_silent_source_does_not_stop_another(tmp_path):
    """One source that never answers leaves the other's points good and its own down."""
    async with modbus_server(holding=registers()) as plc, silent_server() as dead_port:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        text = config.read_text().replace(
            "points:", SECOND_SOURCE.format(port=dead_port) + "points:", 1
        )
        config.write_text(text)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.points.get("drum") and m.points["drum"].quality.good)
            await wait_for(lambda: m.sources["annex-plc"].health.errors, timeout=10.0)
            assert m.sources["boiler-plc"].health.up
            assert not m.sources["annex-plc"].health.up
            assert m.points["hp_header"].quality.good


async def test_reload_swaps_points(tmp_path):
    """A point removed from the config leaves the API and /metrics; a new one appears."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.points.get("hp_header") and m.points["hp_header"].quality.good)
            config.write_text(
                config.read_text().replace("name: hp_header,", "name: turbine_inlet,")
            )
            status, _ = await post(m.url + "/api/v1/reload", None, auth())
            assert status == 200
            await wait_for(lambda: m.points.get("turbine_inlet"))
            assert "hp_header" not in m.points
            text = await metrics_text(m.url)
    assert metric(text, "steamedge_point_quality", point="hp_header") is None
    assert metric(text, "steamedge_point_quality", point="turbine_inlet") == 2
    assert metric(text, "steamedge_point_quality", point="drum") == 2


async def test_reload_that_removes_a_standing_alarm_clears_it_in_the_journal(tmp_path):
    """An alarm a reload removes while it stands gets a journalled 'cleared' event, so a
    receiver (Alertmanager) is told it ended instead of keeping it open."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.alarm_states[ALARM].state == "unacknowledged")
            config.write_text(config.read_text().replace(f"name: {ALARM}", "name: renamed-low"))
            status, _ = await post(m.url + "/api/v1/reload", None, auth())
            assert status == 200
            assert ALARM not in m.alarm_states
            ended = [e for e in m.events(0, 1000) if e.alarm == ALARM and e.kind == "cleared"]
            assert len(ended) == 1
            assert ended[0].comment == "removed from the configuration"
            assert ended[0].id is not None and ended[0].key is not None
            await wait_for(lambda: m.alarm_states["renamed-low"].state == "unacknowledged")
