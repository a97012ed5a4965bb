"""End to end: `steam-edge run` fed by a real Modbus server totals a constant steam flow,
keeps the total through SIGKILL and restart, does not count a bad stretch, and resets the
totals only through the authenticated, journalled API call."""

from __future__ import annotations

import asyncio
import math
import signal
import time
from typing import Any

import pytest

from tests.integration.modbus_server import encode, modbus_server
from tests.integration.servicekit import (
    TOKEN,
    ServiceProcess,
    auth,
    get_json,
    metric,
    metrics_text,
    post,
    registers,
    wait_for,
    write_config,
)

pytestmark = [pytest.mark.asyncio, pytest.mark.slow]

FLOW_ADDR = 10  # holding register of the Coriolis meter's mass flow (float32, kg/s)
RATE = 2.0  # kg/s
INTERVAL = 0.2  # s, the source interval (one evaluation pass per read)
FLOWS = """\
flows:
  - name: hp-coriolis
    meter: mass
    point: hp_header
    signal: hp_m
"""
TAG = f"      - {{name: hp_m, table: holding, address: {FLOW_ADDR}, type: float32, unit: kg/s}}\n"


def _config(tmp_path: Any, port: int) -> Any:
    config = write_config(tmp_path / "edge.yaml", port)
    text = config.read_text()
    text = text.replace("points:\n", TAG + "points:\n", 1).replace("alarms:\n", FLOWS + "alarms:\n")
    config.write_text(text)
    return config


def _plc_registers() -> dict[int, int]:
    regs = registers(hp_mpa=4.0, hp_c=400.0)
    for i, reg in enumerate(encode(RATE, "float32")):
        regs[FLOW_ADDR + i] = reg
    return regs


async def _flow(url: str) -> dict[str, Any]:
    _, body = await get_json(url + "/api/v1/flows")
    (flow,) = body["flows"]
    return flow


async def test_totals_through_run_kill_restart_bad_stretch_and_reset(tmp_path):
    """2 kg/s for N s totals 2N kg within one interval; SIGKILL and restart keep it; a bad
    stretch is not counted (it is 'not measured'); a reset needs the token and is journalled."""
    async with modbus_server(holding=_plc_registers()) as plc:
        config = _config(tmp_path, plc.port)
        first = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: first.url)

            async def counting() -> dict[str, Any] | None:
                f = await _flow(url)
                return f if f["quality"] == "good" and f["totals"]["mass"]["value"] > 0 else None

            start = await wait_for(counting, timeout=20.0)
            t0 = time.monotonic()  # the first reading was answered before this
            await asyncio.sleep(2.0)
            t1 = time.monotonic()  # the second is asked after this
            f = await _flow(url)
            t2 = time.monotonic()
            grown = f["totals"]["mass"]["value"] - start["totals"]["mass"]["value"]
            assert f["mass_flow"] == {"value": RATE, "unit": "kg/s"}
            # constant flow for N s gives RATE x N within one interval at each end
            assert grown >= RATE * ((t1 - t0) - 2 * INTERVAL)
            assert grown <= RATE * ((t2 - t0) + 2 * INTERVAL)
            t = f["totals"]
            counted = t["updated"] - t["since"] - t["not_measured"]["value"]  # before data came
            assert t["mass"]["value"] == pytest.approx(RATE * counted, rel=1e-9)
            text = await metrics_text(url)
            later = (await _flow(url))["totals"]["mass"]["value"]
            scraped = metric(text, "steamedge_flow_mass_kilograms_total", flow="hp-coriolis")
            assert t["mass"]["value"] <= scraped <= later
            before_kill = (await _flow(url))["totals"]
        finally:
            first.proc.send_signal(signal.SIGKILL)
            await asyncio.to_thread(first.stop)
        assert first.proc.returncode == -signal.SIGKILL
        killed_at = time.time()

        await asyncio.sleep(0.5)  # down for a moment: not measured
        second = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: second.url)
            after = (await _flow(url))["totals"]
            assert after["mass"]["value"] >= before_kill["mass"]["value"]  # nothing lost
            # since the restart only what it watched is counted: the downtime is not measured
            watched = (after["updated"] - before_kill["updated"]) - (
                after["not_measured"]["value"] - before_kill["not_measured"]["value"]
            )
            gained = after["mass"]["value"] - before_kill["mass"]["value"]
            assert gained == pytest.approx(RATE * watched, rel=1e-6, abs=1e-9)
            down = after["not_measured"]["value"] - before_kill["not_measured"]["value"]
            assert 0.5 <= down <= time.time() - killed_at + 1.0

            # a bad stretch: the meter sends NaN for about 1.5 s
            await plc.set_registers("holding", FLOW_ADDR, encode(math.nan, "float32"))

            async def bad() -> dict[str, Any] | None:
                f = await _flow(url)
                return f if f["quality"] == "bad" else None

            bad_start = await wait_for(bad, timeout=5.0)
            assert bad_start["mass_flow"] is None
            await asyncio.sleep(1.5)
            bad_end = await _flow(url)
            assert bad_end["quality"] == "bad"
            assert bad_end["totals"]["mass"] == bad_start["totals"]["mass"]  # not counted
            assert (
                bad_end["totals"]["not_measured"]["value"]
                - bad_start["totals"]["not_measured"]["value"]
                >= 1.0
            )
            await plc.set_registers("holding", FLOW_ADDR, encode(RATE, "float32"))
            await wait_for(counting, timeout=5.0)

            # reset: refused without the token, journalled with it
            status, _ = await post(url + "/api/v1/flows/hp-coriolis/reset", {"user": "x"})
            assert status == 401
            assert (await _flow(url))["totals"]["mass"]["value"] > 0
            status, body = await post(
                url + "/api/v1/flows/hp-coriolis/reset",
                {"user": "day-shift", "comment": "start of the month"},
                auth(TOKEN),
            )
            assert status == 200
            assert body["flow"]["totals"]["mass"]["value"] <= RATE * INTERVAL
            assert body["event"]["kind"] == "totals_reset"
            assert body["event"]["user"] == "day-shift"
            _, events = await get_json(url + "/api/v1/events?limit=1000")
            resets = [e for e in events["events"] if e["kind"] == "totals_reset"]
            assert [(e["alarm"], e["comment"]) for e in resets] == [
                ("hp-coriolis", "start of the month")
            ]
            status, _ = await post(
                url + "/api/v1/flows/no-such-flow/reset", {"user": "x"}, auth(TOKEN)
            )
            assert status == 404
        finally:
            assert await asyncio.to_thread(second.stop) == 0
