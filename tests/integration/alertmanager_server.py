"""A real Alertmanager (Debian prometheus-alertmanager) for tests: started on 127.0.0.1 with
its own storage and configuration, stopped by PID. Not collected by pytest."""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import time
import urllib.request
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest


def binary() -> str:
    """The Alertmanager binary; in CI (CI=true) a missing one fails the test, never skips."""
    path = shutil.which("prometheus-alertmanager") or shutil.which("alertmanager")
    if path is None:
        if os.environ.get("CI") == "true":
            pytest.fail("prometheus-alertmanager is required in CI")
        pytest.skip("prometheus-alertmanager not installed")
    return path


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def get(url: str):
    with urllib.request.urlopen(url, timeout=2) as resp:
        return resp.status, resp.read()


def alerts(base: str, alertname: str) -> list[dict]:
    """Alerts Alertmanager shows (active ones: resolved alerts are not listed) by name."""
    status, body = get(f"{base}/api/v2/alerts")
    assert status == 200
    return [a for a in json.loads(body) if a["labels"].get("alertname") == alertname]


@contextmanager
def running_alertmanager(work: Path, config_text: str) -> Iterator[str]:
    """Start Alertmanager with ``config_text`` in folder ``work``; yield its base URL."""
    exe = binary()
    (work / "alertmanager.yml").write_text(config_text)
    port = free_port()
    log_path = work / "alertmanager.log"
    with open(log_path, "wb") as log:
        proc = subprocess.Popen(
            [
                exe,
                f"--config.file={work / 'alertmanager.yml'}",
                f"--storage.path={work / 'data'}",
                f"--web.listen-address=127.0.0.1:{port}",
                "--cluster.listen-address=",  # the default gossip port listens on 0.0.0.0
            ],
            stdout=subprocess.DEVNULL,
            stderr=log,
        )
        base = f"http://127.0.0.1:{port}"
        try:
            deadline = time.monotonic() + 15.0
            while True:
                try:
                    if get(f"{base}/-/ready")[0] == 200:
                        break
                except OSError:
                    pass
                if proc.poll() is not None or time.monotonic() > deadline:
                    text = log_path.read_text(errors="replace")[-2000:]
                    pytest.fail(f"alertmanager did not start:\n{text}")
                time.sleep(0.05)
            yield base
        finally:
            proc.terminate()
            try:
                proc.wait(timeout=10)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait(timeout=10)
