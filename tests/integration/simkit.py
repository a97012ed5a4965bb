"""Helpers for the simulator and demo tests: free ports, polling with a deadline, small
HTTP calls and a Prometheus text scrape, all against 127.0.0.1."""

from __future__ import annotations

import json
import socket
import time
import urllib.error
import urllib.request
from collections.abc import Callable
from typing import Any, TypeVar

from prometheus_client.parser import text_string_to_metric_families

T = TypeVar("T")


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


def wait_for(probe: Callable[[], T | None], timeout: float, what: str, every: float = 0.2) -> T:
    """Call ``probe`` until it returns something truthy; fail after ``timeout`` seconds."""
    deadline = time.monotonic() + timeout
    last: Any = None
    while time.monotonic() < deadline:
        try:
            last = probe()
        except (OSError, urllib.error.URLError, ValueError) as exc:
            last = exc
        else:
            if last:
                return last
        time.sleep(every)
    raise AssertionError(f"timed out after {timeout} s waiting for {what}; last: {last!r}")


def get_json(url: str, timeout: float = 2.0) -> Any:
    with urllib.request.urlopen(url, timeout=timeout) as r:
        return json.loads(r.read())


def put_json(url: str, body: Any, timeout: float = 2.0) -> tuple[int, Any]:
    req = urllib.request.Request(
        url, data=json.dumps(body).encode(), method="PUT", headers={"Content-Type": "json"}
    )
    try:
        with urllib.request.urlopen(req, timeout=timeout) as r:
            return r.status, json.loads(r.read())
    except urllib.error.HTTPError as exc:
        return exc.code, json.loads(exc.read())


def scrape(url: str, timeout: float = 2.0) -> dict[tuple[str, tuple[tuple[str, str], ...]], float]:
    """/metrics as {(sample name, sorted labels): value}."""
    with urllib.request.urlopen(url, timeout=timeout) as r:
        text = r.read().decode()
    out: dict[tuple[str, tuple[tuple[str, str], ...]], float] = {}
    for family in text_string_to_metric_families(text):
        for s in family.samples:
            out[(s.name, tuple(sorted(s.labels.items())))] = s.value
    return out


def series(metrics: dict, name: str, **labels: str) -> float | None:
    """The value of one series, or None when it is not exported."""
    return metrics.get((name, tuple(sorted(labels.items()))))


def point(points: dict, name: str) -> dict:
    """One point of /api/v1/points by name."""
    for p in points["points"]:
        if p["name"] == name:
            return p
    raise KeyError(name)
