"""The fleet view: alert rules pass promtool, and a real Prometheus scrapes the monitor."""

from __future__ import annotations

import asyncio
import os
import shutil
import socket
import subprocess
from pathlib import Path

import aiohttp
import pytest

from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    ServiceProcess,
    metric,
    metrics_text,
    registers,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.slow  # starts processes

ROOT = Path(__file__).resolve().parents[2]
RULES_DIR = ROOT / "config" / "prometheus"


def _tool(name: str) -> str:
    path = shutil.which(name)
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail(f"{name} is required in CI")
        pytest.skip(f"{name} not installed")
    return path


def _promtool(*args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [_tool("promtool"), *args],
        cwd=RULES_DIR,
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )


def test_promtool_check_rules():
    """promtool accepts the alert rules file."""
    done = _promtool("check", "rules", "steam-edge-rules.yml")
    assert done.returncode == 0, done.stdout + done.stderr
    assert "SUCCESS: 5 rules found" in done.stdout


def test_promtool_rule_unit_tests():
    """The rules' unit tests pass: monitor down, source down, critical unacknowledged,
    bad quality, notification backlog."""
    done = _promtool("test", "rules", "steam-edge-rules.test.yml")
    assert done.returncode == 0, done.stdout + done.stderr


def test_promtool_check_scrape_example():
    """The scrape example is a valid Prometheus configuration."""
    done = _promtool("check", "config", "prometheus.yml")
    assert done.returncode == 0, done.stdout + done.stderr


def test_rules_cover_the_fleet_view():
    """Alerts exist for a monitor down, a source down, a critical alarm unacknowledged and a
    bad point quality."""
    text = (RULES_DIR / "steam-edge-rules.yml").read_text()
    for name in (
        "SteamEdgeMonitorDown",
        "SteamEdgeSourceDown",
        "SteamEdgeCriticalAlarmUnacknowledged",
        "SteamEdgePointQualityBad",
    ):
        assert f"alert: {name}" in text


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


@pytest.mark.asyncio
async def test_real_prometheus_scrapes_the_running_service(tmp_path):
    """Debian's Prometheus scrapes `steam-edge run` every second; its query API returns
    steamedge_superheat_kelvin for the drum with the value /metrics shows."""
    binary = _tool("prometheus")
    async with modbus_server(holding=registers()) as plc:
        service = ServiceProcess(write_config(tmp_path / "edge.yaml", plc.port))
        prom = None
        try:
            url = await asyncio.to_thread(lambda: service.url)
            target = url.removeprefix("http://")
            prom_port = _free_port()
            (tmp_path / "prometheus.yml").write_text(
                "global: {scrape_interval: 1s, evaluation_interval: 1s}\n"
                "scrape_configs:\n"
                "  - job_name: steam-edge\n"
                f"    static_configs: [{{targets: ['{target}']}}]\n"
            )
            prom = subprocess.Popen(
                [
                    binary,
                    f"--config.file={tmp_path / 'prometheus.yml'}",
                    f"--storage.tsdb.path={tmp_path / 'tsdb'}",
                    f"--web.listen-address=127.0.0.1:{prom_port}",
                ],
                stdout=subprocess.DEVNULL,
                stderr=subprocess.DEVNULL,
            )
            query = f"http://127.0.0.1:{prom_port}/api/v1/query?query=steamedge_superheat_kelvin"

            async def scraped():
                try:
                    async with aiohttp.ClientSession() as s, s.get(query) as r:
                        body = await r.json()
                except (aiohttp.ClientError, ValueError):
                    return None
                return body["data"]["result"] if body.get("status") == "success" else None

            result = await wait_for(scraped, timeout=45.0, step=0.5)
            text = await metrics_text(url)
        finally:
            if prom is not None:
                prom.terminate()
                prom.wait(10)
            assert await asyncio.to_thread(service.stop) == 0
    series = {r["metric"]["point"]: float(r["value"][1]) for r in result}
    assert series.keys() == {"drum", "hp_header"}
    assert result[0]["metric"]["job"] == "steam-edge"
    assert series["drum"] == pytest.approx(metric(text, "steamedge_superheat_kelvin", point="drum"))
