"""History in the running service: the history API (JSON and CSV) over a real Modbus
server and monitor, the same answer after a restart on the same state folder, and at most
a few seconds lost to a SIGKILL of ``steam-edge run``."""

from __future__ import annotations

import asyncio
import json
import os
import signal
import sqlite3
import time

import aiohttp
import pytest

from edge.history import HistoryReader, default_ladder, rfc3339
from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    ServiceProcess,
    get_json,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio


async def _samples(base: str, query: str) -> list[dict]:
    status, body = await get_json(f"{base}/api/v1/history?{query}")
    assert status == 200, body
    return body["series"][0]["samples"]


async def test_history_answers_si_and_display_values_with_quality(tmp_path, token_env):
    """9 barg + 97 kPa barometer: 997 kPa absolute in SI and 9.97 bar(a) shown, good; the
    source's up/down history of the window beside it."""
    async with modbus_server(holding=registers(drum_barg=9.0, baro_kpa=97.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            q = "point=drum&quantity=pressure&since=-1m"
            rows = await wait_for(lambda: _good(monitor.url, q), 10.0, 0.2)
            _, body = await get_json(f"{monitor.url}/api/v1/history?{q}")
            _, compact = await get_json(f"{monitor.url}/api/v1/history?{q}&format=compact")
    s = body["series"][0]
    assert (s["name"], s["unit"], s["display_unit"], s["resolution"]) == (
        "drum.pressure", "Pa", "bar(a)", "every pass")  # fmt: skip
    last = rows[-1]
    assert last["value"] == pytest.approx(997_000.0, rel=1e-6)  # float32 keeps 7 digits
    assert last["display"] == pytest.approx(9.97, rel=1e-6)
    assert last["quality"] == "good" and last["time"].endswith("Z")
    t, mean, low, high, quality = compact["series"][0]["samples"][-1]  # for the page
    assert (mean, low, high, quality) == (9.97, 9.97, 9.97, 2) and t > 1.7e9
    changes = [(c["source"], c["up"]) for c in body["sources"]]
    assert changes == [
        ("boiler-plc", False),
        ("boiler-plc", True),
    ]  # before its first read, then up


async def test_history_carries_the_window_alarms_and_the_limits(tmp_path, token_env):
    """Drum superheat 0.5 K under a 5 K low limit: the raise is in the window's alarm
    events, and the superheat series carries the limit as a line to draw."""
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            await wait_for(lambda: monitor.alarm_states["drum-superheat-low"].active)
            status, body = await get_json(
                f"{monitor.url}/api/v1/history?point=drum&quantity=superheat&since=-5m"
            )
    assert status == 200
    assert ("drum-superheat-low", "raised") in {(e["alarm"], e["kind"]) for e in body["alarms"]}
    limits = body["series"][0]["limits"]
    assert limits == [
        {"alarm": "drum-superheat-low", "kind": "low", "priority": "critical", "display": 5.0}
    ]


async def _good(base: str, query: str) -> list[dict] | None:
    rows = await _samples(base, query)
    good = [r for r in rows if r["quality"] == "good"]
    return good if len(good) >= 3 else None


async def test_history_csv_has_a_header_and_one_row_per_sample(tmp_path, token_env):
    """history.csv: the same query as rows of time, series, SI value, unit, display, quality."""
    async with modbus_server(holding=registers(drum_c=190.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            q = "point=drum&quantity=temperature&since=-1m"
            await wait_for(lambda: _good(monitor.url, q), 10.0, 0.2)
            async with (
                aiohttp.ClientSession() as s,
                s.get(f"{monitor.url}/api/v1/history.csv?{q}") as r,
            ):
                assert r.status == 200 and r.content_type == "text/csv"
                text = await r.text()
    lines = text.strip().splitlines()
    assert lines[0] == "time,series,value,unit,display,display_unit,min,max,quality"
    last = lines[-1].split(",")
    assert last[1] == "drum.temperature" and last[3] == "K" and last[5] == "degC"
    assert float(last[4]) == pytest.approx(190.0, abs=1e-4) and last[8] == "good"


async def test_bad_history_queries_are_400_with_one_line(tmp_path, token_env):
    """Unknown point, unknown quantity, a time without offset: 400 bad_query each."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            base = monitor.url + "/api/v1/history?"
            answers = [await get_json(base + q) for q in (
                "point=boiler", "point=drum&quantity=flow", "point=drum&since=2026-01-01T00:00",
                "point=drum&step=0.1s")]  # fmt: skip
    assert [a[0] for a in answers] == [400, 400, 400, 400]
    assert "no point or tag named 'boiler'" in answers[0][1]["detail"]
    assert "quantity must be one of" in answers[1][1]["detail"]
    assert "RFC 3339" in answers[2][1]["detail"]


async def test_the_same_query_answers_the_same_after_a_restart(tmp_path, token_env):
    """Stop the monitor, start it on the same state folder: a window before the stop reads
    back sample for sample."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            await wait_for(lambda: _good(monitor.url, "point=drum&since=-1m"), 10.0, 0.2)
            await asyncio.sleep(1.0)
            until = time.time()
            q = f"point=drum&quantity=tsat&since={rfc3339(until - 60)}&until={rfc3339(until)}"
            before = await _samples(monitor.url, q)
        async with running_monitor(config) as monitor:
            after = await _samples(monitor.url, q)
    assert len(before) >= 5
    assert after == before


@pytest.mark.slow
async def test_a_sigkill_loses_at_most_a_few_seconds(tmp_path):
    """``steam-edge run`` killed with SIGKILL: the file opens, passes an integrity check,
    and its newest sample is at most 3 s older than the kill."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        proc = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: proc.url)
            await wait_for(lambda: _good(url, "point=drum&since=-1m"), 15.0, 0.2)
            await asyncio.sleep(2.0)
            killed = time.time()
            os.kill(proc.proc.pid, signal.SIGKILL)
            proc.proc.wait(5)
        finally:
            proc.stop()
    path = str(tmp_path / "state.history.sqlite")
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    conn.close()
    reader = HistoryReader.open(path, default_ladder())
    run = reader.query("drum.pressure", killed - 60, killed + 5, None, killed).run
    reader.close()
    assert len(run) >= 10
    assert killed - run.times[-1] <= 3.0


async def test_with_history_disabled_the_api_says_so(tmp_path, token_env):
    """storage.history.enabled: false: no history file, and the API answers 503 saying why."""
    async with modbus_server(holding=registers()) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        config.write_text(config.read_text() + "  history: {enabled: false}\n")
        async with running_monitor(config) as monitor:
            status, body = await get_json(f"{monitor.url}/api/v1/history?point=drum")
    assert status == 503 and body["error"] == "history_unavailable"
    assert "storage.history.enabled: false" in body["detail"]
    assert not (tmp_path / "state.history.sqlite").exists()


async def _live(url: str, messages: int) -> list[dict]:
    out = []
    timeout = aiohttp.ClientTimeout(total=20)
    async with (
        aiohttp.ClientSession(timeout=timeout) as s,
        s.get(url + "/api/v1/live?every=1") as r,
    ):
        assert r.headers["Content-Type"].startswith("text/event-stream")
        async for line in r.content:
            if line.startswith(b"data: "):
                out.append(json.loads(line[6:]))
                if len(out) == messages:
                    return out
    return out


async def test_the_live_stream_sends_texts_only_when_they_change(tmp_path, token_env):
    """The first message has every part; later ones, with nothing changed, the time, the
    figures ([p abs bar, p gauge bar, T degC, Tsat degC, superheat K, quality]) and the
    sources (their last read moves) but no point texts, alarms or health."""
    async with modbus_server(holding=registers(drum_barg=9.0, baro_kpa=97.0, drum_c=190.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as monitor:
            await wait_for(lambda: _good(monitor.url, "point=drum&since=-1m"), 10.0, 0.2)
            await asyncio.sleep(1.0)
            messages = await _live(monitor.url, 3)
    first, last = messages[0], messages[-1]
    assert {"t", "p", "texts", "alarms", "health", "sources", "site"} <= set(first)
    assert set(last) == {"t", "p", "sources"}
    pabs, pg, t, tsat, sh, q = last["p"]["drum"]
    assert (pabs, t, q) == (9.97, 190.0, 2)
    assert pg == pytest.approx(9.97 - 0.97, abs=1e-4)  # absolute - barometer (the 97 kPa tag)
    assert sh == pytest.approx(t - tsat, abs=0.02)
