"""OPC UA latency: source timestamp -> Sample, for 200 subscribed nodes changing every second.

    python tests/bench/opcua.py [--nodes 200] [--interval 1.0 --interval 0.1] [--seconds 15]

A test server in a child process rewrites every node once a second, spread evenly over the
second, with the write time as its source timestamp (so the wait for the next publishing
cycle is uniform whatever the subscription's phase). First the baseline: asyncua's bare
subscription path (one subscription, a handler that notes ``now - SourceTimestamp`` for each
notification); then steam-edge's OpcUaSource with the same publishing interval, noting
``now - source_time`` in ``emit`` for each new value (the per-interval re-emissions of
unchanged values are not counted). Both on 127.0.0.1, one after the other, against the same
server. Prints median and p95 of each and their ratio.
"""

from __future__ import annotations

import argparse
import asyncio
import statistics
import sys
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from asyncua import Client

from edge import config as cfg
from edge.sources.opcua import OpcUaSource
from tests.integration.opcua_server import ServerProcess, bench_name

WARM_UP = 2.5  # s: initial values carry old timestamps; skip them


def p95(values: list[float]) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, round(0.95 * (len(ordered) - 1)))]


async def baseline(url: str, nodes: list[str], interval: float, seconds: float) -> list[float]:
    """asyncua alone: subscription + handler, latency measured inside the handler."""
    latencies: list[float] = []
    start = time.time()

    class Handler:
        def datachange_notification(self, node, val, data) -> None:  # type: ignore[no-untyped-def]
            now = time.time()
            ts = data.monitored_item.Value.SourceTimestamp
            if ts is not None and now - start > WARM_UP:
                latencies.append(now - ts.timestamp())

    client = Client(url, timeout=5)
    await client.connect()
    try:
        sub = await client.create_subscription(interval * 1000, Handler())
        await sub.subscribe_data_change(
            [client.get_node(n) for n in nodes], sampling_interval=interval * 1000
        )
        await asyncio.sleep(seconds + WARM_UP)
    finally:
        await client.disconnect()
    return latencies


async def ours(url: str, nodes: list[str], interval: float, seconds: float) -> list[float]:
    """steam-edge: OpcUaSource in subscribe mode, latency measured in emit."""
    config = cfg.OpcUaSource.model_validate(
        {
            "name": "bench",
            "protocol": "opcua",
            "endpoint": url,
            "interval": interval,
            "timeout": 5.0,
            "tags": [
                {"name": f"t{i}", "node": n, "unit": "bar", "reference": "gauge"}
                for i, n in enumerate(nodes)
            ],
        }
    )
    latencies: list[float] = []
    seen: dict[str, float] = {}
    start = time.time()

    def emit(samples: list) -> None:  # type: ignore[type-arg]
        now = time.time()
        for s in samples:
            if seen.get(s.tag) == s.source_time or not s.quality.good:
                continue
            seen[s.tag] = s.source_time
            if now - start > WARM_UP:
                latencies.append(now - s.source_time)

    task = asyncio.create_task(OpcUaSource(config).run(emit))
    await asyncio.sleep(seconds + WARM_UP)
    task.cancel()
    await asyncio.wait({task}, timeout=10.0)  # bounded: a source that ignores it fails below
    assert task.done(), "the OPC UA source did not stop within 10 s of a cancel"
    return latencies


def report(name: str, values: list[float]) -> tuple[float, float]:
    med, hi = statistics.median(values), p95(values)
    print(f"  {name:<34} n={len(values):>6}  median {med * 1e3:7.1f} ms  p95 {hi * 1e3:7.1f} ms")
    return med, hi


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--nodes", type=int, default=200)
    parser.add_argument(
        "--interval",
        type=float,
        action="append",
        help="publishing interval in s (repeatable; default 1.0 and 0.1)",
    )
    parser.add_argument("--seconds", type=float, default=15.0, help="measuring time per run")
    args = parser.parse_args()
    intervals = args.interval or [1.0, 0.1]
    server = ServerProcess("--count", str(args.nodes), "--period", "1.0")
    server.start()
    print(
        f"{args.nodes} nodes, each changing once a second (spread over the second); "
        f"{args.seconds:g} s per run; server in a child process on 127.0.0.1"
    )
    try:
        ids = [f"ns=2;s={bench_name(i)}" for i in range(args.nodes)]
        for interval in intervals:
            print(f"publishing interval {interval:g} s")
            base = asyncio.run(baseline(server.url, ids, interval, args.seconds))
            mine = asyncio.run(ours(server.url, ids, interval, args.seconds))
            b_med, b_p95 = report("asyncua bare subscription", base)
            o_med, o_p95 = report("steam-edge OpcUaSource -> Sample", mine)
            print(
                f"  ratio steam-edge / baseline: median {o_med / b_med:.2f} "
                f"({(o_med - b_med) * 1e3:+.1f} ms), p95 {o_p95 / b_p95:.2f} "
                f"({(o_p95 - b_p95) * 1e3:+.1f} ms)"
            )
    finally:
        server.kill()
    return 0


if __name__ == "__main__":
    sys.exit(main())
