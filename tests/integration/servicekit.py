"""Helpers for the service tests: a config for an invented boiler house fed by the Modbus
test server, an in-process monitor, and ``steam-edge run`` as a subprocess whose JSON log
lines are collected as they come."""

from __future__ import annotations

import asyncio
import contextlib
import json
import os
import signal
import subprocess
import sys
import threading
import time
from collections.abc import AsyncIterator, Callable
from pathlib import Path
from typing import Any

import aiohttp

from tests.integration.modbus_server import encode
from tests.support import STOP_WITHIN

TOKEN = "test-token-7f3a9c"  # an invented token for tests only
EXE = str(Path(sys.executable).parent / "steam-edge")

# holding-register layout of the test PLC (float32, big word order)
DRUM_P, DRUM_T, BARO, HP_P, HP_T = 0, 2, 4, 6, 8


def registers(
    drum_barg: float = 9.0,
    drum_c: float = 190.0,
    baro_kpa: float = 97.0,
    hp_mpa: float = 4.0,
    hp_c: float = 400.0,
) -> dict[int, int]:
    out: dict[int, int] = {}
    for address, value in (
        (DRUM_P, drum_barg),
        (DRUM_T, drum_c),
        (BARO, baro_kpa),
        (HP_P, hp_mpa),
        (HP_T, hp_c),
    ):
        for i, reg in enumerate(encode(value, "float32")):
            out[address + i] = reg
    return out


def config_text(
    port: int,
    state: Path,
    *,
    listen: str = "127.0.0.1:0",
    token_env: str | None = "STEAMEDGE_TEST_TOKEN",
    token_file: Path | None = None,
    superheat_low: str = "5 K",
    extra_alarm: str = "",
    interval: str = "200 ms",
    baro_max_age: str = "2 s",
    shelvable: str = "[critical, high, medium, low]",
) -> str:
    token = f"  token_env: {token_env}\n" if token_env else ""
    if token_file is not None:
        token = f"  token_file: {token_file}\n"
    return f"""\
version: 1
site: riverside-laundry
barometer:
  fixed: 101.325 kPa
  tag: baro
  max_age: {baro_max_age}
sources:
  - name: boiler-plc
    protocol: modbus-tcp
    host: 127.0.0.1
    port: {port}
    interval: {interval}
    timeout: 500 ms
    tags:
      - {{name: drum_p, table: holding, address: {DRUM_P}, type: float32, unit: bar,
         reference: gauge}}
      - {{name: drum_t, table: holding, address: {DRUM_T}, type: float32, unit: degC}}
      - {{name: baro, table: holding, address: {BARO}, type: float32, unit: kPa,
         reference: absolute}}
      - {{name: hp_p, table: holding, address: {HP_P}, type: float32, unit: MPa,
         reference: absolute}}
      - {{name: hp_t, table: holding, address: {HP_T}, type: float32, unit: degC}}
points:
  - {{name: drum, pressure: drum_p, temperature: drum_t, state: superheated}}
  - {{name: hp_header, pressure: hp_p, temperature: hp_t, state: superheated}}
alarms:
  - name: drum-superheat-low
    signal: drum.superheat
    low: {superheat_low}
    priority: critical
    message: Superheat at the drum outlet is low
{extra_alarm}alarm_philosophy:
  shelvable_priorities: {shelvable}
  max_shelve: 2 h
http:
  listen: {listen}
{token}storage:
  path: {state}
"""


def write_config(path: Path, port: int, **kw: Any) -> Path:
    path.write_text(config_text(port, path.parent / "state.sqlite", **kw))
    return path


async def wait_for(check: Callable[[], Any], timeout: float = 10.0, step: float = 0.05) -> Any:
    """Poll ``check`` (sync or async) until it returns something truthy; fail at deadline."""
    import asyncio

    deadline = time.monotonic() + timeout
    while True:
        result = check()
        if asyncio.iscoroutine(result):
            result = await result
        if result:
            return result
        if time.monotonic() > deadline:
            raise AssertionError(f"condition not met within {timeout} s")
        await asyncio.sleep(step)


@contextlib.asynccontextmanager
async def running_monitor(config: Path, **kw: Any) -> AsyncIterator[Any]:
    from edge.service import Monitor

    monitor = Monitor(str(config), **kw)
    await monitor.start()
    try:
        yield monitor
    finally:
        await asyncio.wait_for(monitor.stop(), STOP_WITHIN)


def auth(token: str = TOKEN) -> dict[str, str]:
    return {"Authorization": f"Bearer {token}"}


async def get_json(url: str) -> tuple[int, Any]:
    async with aiohttp.ClientSession() as s, s.get(url) as r:
        return r.status, await r.json()


async def post(url: str, body: Any = None, headers: dict[str, str] | None = None):
    async with (
        aiohttp.ClientSession() as s,
        s.post(url, json=body, headers=headers or {}) as r,
    ):
        return r.status, await r.json()


async def metrics_text(base: str) -> str:
    async with aiohttp.ClientSession() as s, s.get(base + "/metrics") as r:
        return await r.text()


def metric(text: str, name: str, **labels: str) -> float | None:
    """The value of one sample in exposition text, or None when the series is absent."""
    from prometheus_client.parser import text_string_to_metric_families

    for fam in text_string_to_metric_families(text):
        for s in fam.samples:
            if s.name == name and all(s.labels.get(k) == v for k, v in labels.items()):
                return float(s.value)
    return None


class ServiceProcess:
    """``steam-edge run -c CONFIG`` as a subprocess; log lines collected in ``lines``."""

    def __init__(
        self,
        config: Path,
        env: dict[str, str] | None = None,
        *args: str,
        preexec_fn: Callable[[], None] | None = None,
    ) -> None:
        full_env = {**os.environ, "STEAMEDGE_TEST_TOKEN": TOKEN, **(env or {})}
        self.proc = subprocess.Popen(
            [EXE, "run", "-c", str(config), *args],
            stdout=subprocess.PIPE,
            stderr=subprocess.PIPE,
            env=full_env,
            text=True,
            preexec_fn=preexec_fn,
        )
        self.lines: list[str] = []
        self.stderr: list[str] = []
        self._threads = [
            threading.Thread(target=self._pump, args=(self.proc.stdout, self.lines), daemon=True),
            threading.Thread(target=self._pump, args=(self.proc.stderr, self.stderr), daemon=True),
        ]
        for t in self._threads:
            t.start()

    @staticmethod
    def _pump(stream: Any, into: list[str]) -> None:
        for line in stream:
            into.append(line.rstrip("\n"))

    def events(self) -> list[dict[str, Any]]:
        out = []
        for line in list(self.lines):
            with contextlib.suppress(ValueError):
                out.append(json.loads(line))
        return out

    def event(self, name: str) -> dict[str, Any] | None:
        return next((e for e in self.events() if e.get("event") == name), None)

    def wait_event(self, name: str, timeout: float = 30.0) -> dict[str, Any]:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            found = self.event(name)
            if found is not None:
                return found
            if self.proc.poll() is not None:
                time.sleep(0.2)  # let the pumps finish
                found = self.event(name)
                if found is not None:
                    return found
                raise AssertionError(
                    f"steam-edge exited {self.proc.returncode} before {name!r}:\n"
                    + "\n".join(self.lines[-20:] + self.stderr[-20:])
                )
            time.sleep(0.05)
        raise AssertionError(f"no {name!r} log event within {timeout} s")

    @property
    def url(self) -> str:
        return self.wait_event("http_listening")["url"]

    def signal(self, sig: int) -> None:
        self.proc.send_signal(sig)

    def stop(self, timeout: float = 10.0) -> int:
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGTERM)
            try:
                self.proc.wait(timeout)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(5)
        for t in self._threads:
            t.join(2)
        return self.proc.returncode
