"""The fleet view: alert rules pass promtool, and a real Prometheus scrapes the monitor."""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import pytest

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
