"""Deployment files: the systemd unit verifies, the Dockerfile has what a deployment needs."""

from __future__ import annotations

import configparser
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

pytestmark = pytest.mark.slow  # starts processes

ROOT = Path(__file__).resolve().parents[2]
UNIT = ROOT / "systemd" / "steam-edge.service"
DOCKERFILE = ROOT / "Dockerfile"
INSTALLED_PATH = "/opt/steam-edge/.venv/bin/steam-edge"


def _tool(name: str) -> str:
    path = shutil.which(name)
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail(f"{name} is required in CI")
        pytest.skip(f"{name} not installed")
    return path


def _unit() -> configparser.ConfigParser:
    parser = configparser.ConfigParser(strict=False, interpolation=None)
    parser.optionxform = str  # type: ignore[assignment,method-assign]
    parser.read_string(UNIT.read_text())
    return parser


def _unit_values(key: str) -> list[str]:
    """Every value of a key in [Service] (systemd allows a key to repeat)."""
    values = []
    section = ""
    for raw in UNIT.read_text().splitlines():
        line = raw.strip()
        if line.startswith("["):
            section = line
        elif section == "[Service]" and line.startswith(f"{key}="):
            values.append(line.split("=", 1)[1])
    return values


def test_unit_passes_systemd_analyze_verify(tmp_path):
    """systemd-analyze verify accepts the unit (ExecStart pointed at a real executable)."""
    tool = _tool("systemd-analyze")
    text = UNIT.read_text().replace(INSTALLED_PATH, str(Path(sys.executable).parent / "steam-edge"))
    copy = tmp_path / "steam-edge.service"
    copy.write_text(text)
    done = subprocess.run(
        [tool, "verify", str(copy)], capture_output=True, text=True, timeout=60, check=False
    )
    assert done.returncode == 0, done.stderr
    assert "Unknown" not in done.stderr and "Invalid" not in done.stderr, done.stderr


def test_unit_hardening_keys():
    """The unit is Type=notify with a watchdog, restart on failure and the sandbox keys."""
    svc = _unit()["Service"]
    assert svc["Type"] == "notify"
    assert svc["WatchdogSec"]
    assert svc["Restart"] == "on-failure"
    assert svc["DynamicUser"] == "yes"
    assert svc["StateDirectory"] == "steam-edge"
    assert svc["ProtectSystem"] == "strict"
    assert svc["NoNewPrivileges"] == "yes"
    assert _unit_values("CapabilityBoundingSet") == [""]
    assert svc["RestrictAddressFamilies"]
    assert "@system-service" in _unit_values("SystemCallFilter")
    assert svc["LoadCredential"].startswith("api-token:")
    assert svc["ExecStart"].endswith("run -c /etc/steam-edge/config.yaml")


def test_unit_keeps_proc_stat_for_the_process_metrics():
    """ProcSubset=pid would hide /proc/stat, and prometheus_client's process collector
    then exports nothing (no RSS or CPU of the monitor): the unit must not set it."""
    assert _unit_values("ProcSubset") in ([], ["all"])
    assert _unit()["Service"]["ProtectProc"] == "invisible"  # other processes stay hidden


def test_unit_documents_rtu_device_and_credentials():
    """A commented DeviceAllow= for RTU ports and the credentials path are documented."""
    text = UNIT.read_text()
    assert "# DeviceAllow=/dev/tty" in text
    assert "/run/credentials/steam-edge.service/api-token" in text


def _dockerfile() -> list[tuple[str, str]]:
    """(instruction, arguments) pairs, with continuation lines joined."""
    out: list[tuple[str, str]] = []
    pending = ""
    for raw in DOCKERFILE.read_text().splitlines():
        line = raw.strip()
        if not pending and (not line or line.startswith("#")):
            continue
        if line.endswith("\\"):
            pending += line[:-1] + " "
            continue
        line = pending + line
        pending = ""
        word, _, rest = line.partition(" ")
        out.append((word.upper(), rest.strip()))
    return out


def test_dockerfile_slim_base_and_non_root_user():
    """The image starts from a slim Python and runs as a non-root user."""
    steps = _dockerfile()
    assert steps[0][0] == "FROM" and "python" in steps[0][1] and "slim" in steps[0][1]
    users = [arg for word, arg in steps if word == "USER"]
    assert users and users[-1] not in ("root", "0")


def test_dockerfile_volumes_healthcheck_and_entrypoint():
    """Config and state are volumes; the health check asks /healthz; the command is run."""
    steps = dict(_dockerfile())
    assert "/etc/steam-edge" in steps["VOLUME"] and "/var/lib/steam-edge" in steps["VOLUME"]
    assert "/healthz" in steps["HEALTHCHECK"]
    assert "steam-edge" in steps["ENTRYPOINT"]
    assert '"run"' in steps["CMD"]


def test_dockerignore_keeps_venv_and_git_out():
    """The build context leaves out the virtualenv, git history and state files."""
    lines = (ROOT / ".dockerignore").read_text().split()
    assert ".venv" in lines and ".git" in lines and "*.sqlite" in lines
