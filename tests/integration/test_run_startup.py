"""What `steam-edge run` says as it starts: storage it cannot write (read-only, full) is one
readable error line naming the path and a non-zero exit; an OPC UA source with security
policy None towards another host is a logged warning.

Tests run as root here, and root ignores file permissions, so the read-only and full file
systems are real tmpfs mounts inside a private mount namespace (``unshare --mount``;
``--map-root-user`` when not root) that vanishes with the child process."""

from __future__ import annotations

import asyncio
import os
import shutil
import subprocess
from pathlib import Path

import pytest

from tests.integration.opcua_server import free_port
from tests.integration.servicekit import EXE, ServiceProcess

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

CONFIG = """\
version: 1
site: riverside-laundry
barometer:
  fixed: 101.325 kPa
sources:
{sources}points: []
http:
  listen: 127.0.0.1:0
storage:
  path: {state}
"""

MODBUS = """\
  - name: boiler-plc
    protocol: modbus-tcp
    host: 127.0.0.1
    port: {port}
    tags:
      - {{name: drum_p, table: holding, address: 0, type: float32, unit: bar,
         reference: gauge}}
"""

OPCUA = """\
  - name: {name}
    protocol: opcua
    endpoint: opc.tcp://{host}:{port}/plc
    interval: 200 ms
    timeout: 200 ms
    tags:
      - {{name: {name}_t, node: "ns=2;s=HP.Temperature", unit: degC}}
"""


def _run_in_namespace(tmp_path: Path, mount_options: str, prepare: str = "") -> tuple[int, str]:
    """`steam-edge run` with its storage on a tmpfs mounted with ``mount_options``, after the
    shell commands ``prepare`` ran on it; returns the exit code and stderr."""
    unshare = shutil.which("unshare")
    assert unshare, "unshare (util-linux) is needed for the storage start-up tests"
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    config = tmp_path / "edge.yaml"
    sources = MODBUS.format(port=free_port())
    config.write_text(CONFIG.format(sources=sources, state=mnt / "state.sqlite"))
    mount = f"mount -t tmpfs -o {mount_options} tmpfs '{mnt}'"
    script = f"{mount} && {prepare} exec '{EXE}' run -c '{config}'"
    cmd = [unshare, "--mount", "--propagation", "private"]
    if os.geteuid() != 0:
        cmd.append("--map-root-user")
    run = subprocess.run([*cmd, "sh", "-c", script], capture_output=True, text=True, timeout=60)
    return run.returncode, run.stderr


def _errors(stderr: str) -> list[str]:
    assert "Traceback" not in stderr
    return [line for line in stderr.splitlines() if line.startswith("error:")]


async def test_read_only_storage_stops_run_with_one_line_naming_the_path(tmp_path):
    """Storage on a read-only file system: exit 1 and one error line with path and reason."""
    code, stderr = await asyncio.to_thread(_run_in_namespace, tmp_path, "size=1m,ro")
    path = tmp_path / "mnt" / "state.sqlite"
    assert code == 1
    assert _errors(stderr) == [f"error: alarm journal {path}: cannot open: Read-only file system"]


async def test_full_storage_stops_run_with_one_line_naming_the_path(tmp_path):
    """Storage on a full file system: exit 1 and one error line with path and SQLite's reason."""
    fill = f"dd if=/dev/zero of='{tmp_path / 'mnt'}/filler' bs=4k 2>/dev/null;"
    code, stderr = await asyncio.to_thread(_run_in_namespace, tmp_path, "size=64k", fill)
    path = tmp_path / "mnt" / "state.sqlite"
    assert code == 1
    [line] = _errors(stderr)
    assert line.startswith(f"error: alarm journal {path}: cannot open: database or disk is full")


async def test_policy_none_off_this_machine_is_logged_as_run_starts(tmp_path):
    """An OPC UA source with policy None towards another address logs a warning at start-up;
    one towards 127.0.0.1 does not."""
    port = free_port()
    sources = OPCUA.format(name="far", host="127.0.0.2", port=port) + OPCUA.format(
        name="near", host="127.0.0.1", port=port
    )
    config = tmp_path / "edge.yaml"
    config.write_text(CONFIG.format(sources=sources, state=tmp_path / "state.sqlite"))
    service = ServiceProcess(config)
    try:
        warning = await asyncio.to_thread(service.wait_event, "source_security")
        await asyncio.to_thread(service.wait_event, "started")
    finally:
        assert await asyncio.to_thread(service.stop) == 0
    warnings = [e for e in service.events() if e["event"] == "source_security"]
    assert warnings == [warning]
    assert (warning["level"], warning["source"]) == ("warning", "far")
    assert "security policy None towards 127.0.0.2" in warning["warning"]
