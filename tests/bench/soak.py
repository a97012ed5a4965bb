"""Soak: the whole service at 10,000 tags for 30 minutes; does its resident memory grow?

Run: ``python tests/bench/soak.py [--minutes 30] [--points 5000] [--settle 5] [--strict]``

The plant of ``tests/bench/service.py`` (one Modbus TCP server on 127.0.0.1, a pressure
and a temperature register pair per point, every value changed once per second),
``steam-edge run`` polling it every second as a subprocess, and the same scrapes as a
Prometheus would make: the whole /metrics every 15 s and one family every second. Every
10 s the subprocess's resident set (VmRSS in /proc) is sampled.

Figures: the lowest RSS of the first 5-minute window after the settling time (``--settle``,
default 5 min: start-up, first scrapes and caches filled) and of the last 5-minute window
(a full scrape lifts RSS for a moment, so lows are compared), the growth between the two,
the slope of a least-squares line over the samples after settling (MiB/hour), peak RSS
(VmHWM) and the service's log lines by event.
Goal (issue 17): growth <= 2 MiB after the first 5 minutes. A baseline here is the
service's own first 5 minutes: the question is drift, not size.
"""

from __future__ import annotations

import argparse
import asyncio
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import aiohttp

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.bench.service import (  # noqa: E402
    EXE,
    FULL_EVERY,
    PROBE_QUERY,
    _scrape,
    _wait_url,
    _writer,
    config,
    drain_log,
    peak_rss_mib,
    registers,
)
from tests.integration.modbus_server import modbus_server  # noqa: E402

GOAL_GROWTH = 2.0  # MiB after settling
SAMPLE_EVERY = 10.0  # s
WINDOW = 300.0  # s: the lows of the first and last window after settling are compared


def rss_mib(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def slope_per_hour(samples: list[tuple[float, float]]) -> float:
    """Least-squares slope of (seconds, MiB) in MiB per hour."""
    if len(samples) < 2:
        return float("nan")
    n = len(samples)
    mt = sum(t for t, _ in samples) / n
    mr = sum(r for _, r in samples) / n
    var = sum((t - mt) ** 2 for t, _ in samples)
    cov = sum((t - mt) * (r - mr) for t, r in samples)
    return cov / var * 3600.0 if var > 0 else float("nan")


async def soak(points: int, minutes: float, settle: float, port: int, work: Path) -> dict:
    cfg = work / "soak.yaml"
    cfg.write_text(config(points, port, work / "state.sqlite"))
    proc = subprocess.Popen(
        [EXE, "run", "-c", str(cfg)],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )
    samples: list[tuple[float, float]] = []
    scrapes = failures = 0
    drain: asyncio.Future[None] | None = None
    log: dict[str, int] = {}
    try:
        url = await _wait_url(proc, time.monotonic() + 180)
        # the service's stdout must keep draining, or its log writes would block it
        drain = asyncio.ensure_future(asyncio.to_thread(drain_log, proc, log))
        t0 = time.monotonic()
        end = t0 + minutes * 60.0
        next_tick = next_sample = t0
        tick = 0
        async with aiohttp.ClientSession(timeout=aiohttp.ClientTimeout(total=30)) as session:
            while time.monotonic() < end:
                try:
                    if tick % FULL_EVERY == 0:
                        await _scrape(session, url)
                    await _scrape(session, url, PROBE_QUERY)
                    scrapes += 1
                except (aiohttp.ClientError, TimeoutError):
                    failures += 1
                tick += 1
                now = time.monotonic()
                if now >= next_sample:
                    samples.append((now - t0, rss_mib(proc.pid)))
                    next_sample += SAMPLE_EVERY
                next_tick += 1.0
                await asyncio.sleep(max(0.0, next_tick - time.monotonic()))
        peak = peak_rss_mib(proc.pid)
    finally:
        proc.terminate()
        proc.wait(30)
    if drain is not None:
        await asyncio.wait_for(drain, 10)
    after = [(t, r) for t, r in samples if t >= settle * 60.0]
    # a full scrape lifts RSS for a moment (its text is built, sent, freed): compare the
    # lows of the first and the last window after settling, not two arbitrary samples
    span = min(WINDOW, max(SAMPLE_EVERY, (minutes - settle) * 60.0 / 3))
    first = [r for t, r in after if t < after[0][0] + span] if after else []
    last = [r for t, r in after if t > after[-1][0] - span] if after else []
    return {
        "samples": samples,
        "settled": min(first, default=float("nan")),
        "end": min(last, default=float("nan")),
        "max_after": max((r for _, r in after), default=float("nan")),
        "slope": slope_per_hour(after),
        "peak": peak,
        "scrapes": scrapes,
        "failures": failures,
        "log": log,
    }


async def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--minutes", type=float, default=30.0, help="soak length (default 30)")
    ap.add_argument("--points", type=int, default=5000, help="points, 2 tags each (5000)")
    ap.add_argument("--settle", type=float, default=5.0, help="minutes not judged (5)")
    ap.add_argument("--strict", action="store_true", help="exit 1 when the goal is missed")
    args = ap.parse_args()
    stop = asyncio.Event()
    async with modbus_server(holding=registers(args.points, int(time.time()))) as server:
        writer = asyncio.create_task(_writer(server, args.points, stop))
        with tempfile.TemporaryDirectory() as tmp:
            r = await soak(args.points, args.minutes, args.settle, server.port, Path(tmp))
        stop.set()
        await writer
    growth = r["end"] - r["settled"]
    print(
        f"soak: {args.points} points ({2 * args.points} tags), {args.minutes:g} min, "
        f"1 s poll, {r['scrapes']} scrapes ({r['failures']} failed)"
    )
    for t, rss in r["samples"][:: max(1, len(r["samples"]) // 12)]:
        print(f"  t={t / 60:5.1f} min  RSS {rss:6.1f} MiB")
    print(f"  RSS low, first window after {args.settle:g} min  {r['settled']:.1f} MiB")
    print(f"  RSS low, last window            {r['end']:.1f} MiB")
    print(f"  RSS max after settling          {r['max_after']:.1f} MiB")
    print(f"  growth              {growth:+.2f} MiB   (goal <= {GOAL_GROWTH:g})")
    print(f"  slope               {r['slope']:+.2f} MiB/hour after settling")
    print(f"  peak RSS (VmHWM)    {r['peak']:.1f} MiB")
    print(f"  log lines           {sum(r['log'].values())} {dict(sorted(r['log'].items()))}")
    ok = growth <= GOAL_GROWTH and r["failures"] == 0
    print("goal met" if ok else "GOAL MISSED")
    return 0 if ok or not args.strict else 1


if __name__ == "__main__":
    sys.exit(asyncio.run(main()))
