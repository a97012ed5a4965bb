"""The whole service under load: 500 points fed by one Modbus server at a 1 s interval.

Run: ``python tests/bench/service.py [--seconds 60] [--points 500] [--strict]``

This process serves an invented boiler house over Modbus TCP on 127.0.0.1 (a pressure and
a temperature register pair per point, 2,000 registers) and changes every value once per
second; ``steam-edge run`` runs as a subprocess polling it every second. This process
scrapes its whole /metrics every 15 s (Prometheus' usual interval, as in
config/prometheus/prometheus.yml) and, every second, the one family the age probe needs
(``/metrics?name[]=steamedge_temperature_celsius``). The cost of one full scrape is printed
too, so the figure for a 1 s full scrape can be worked out (CPU + 60 x full scrape).

One point's temperature carries the time it was written (``200 degC + (t mod 400 s)``,
rewritten every 20 ms), so each scrape tells how old the value it shows is: the age of a
value when it reaches /metrics (poll interval + read + evaluation + exposition).

Figures, measured from /proc of the subprocess over the window after start-up:
CPU seconds per minute, peak RSS (VmHWM) and the p50/p95/max age. The baseline, measured
in the same run, is a bare pymodbus client process that only reads and decodes the same
registers at the same pace: the ratio says what the rest of the pipeline costs on top.

Goals (issue 17): at 500 points <= 0.8 CPU-s/min and <= 100 MiB peak RSS; at 5,000 points
(10,000 tags) <= 6 CPU-s/min, <= 150 MiB, value age p95 <= 1.2 s and a full scrape <= 100 ms
of the service's CPU (CPU read just before the request and 50 ms after the answer). Other
sizes are held to the 5,000-point goals scaled down, never below the 500-point ones.

With ``--publish`` a mosquitto is started on 127.0.0.1 and two services run at the same time
on the same Modbus server, one without and one with a JSON publishing channel to it (report
by exception: deadband 0.1 bar / 1 K, 60 s maximum silence): the difference of their CPU over
the same window is what publishing adds (goal, issue 16: <= 0.5 CPU-s/min); a subscriber
counts the messages that arrive.
``--history`` runs two services the same way, without and with the embedded history
(goal, issue 14: <= 0.5 CPU-s/min added).

With ``--flows N`` the service runs twice in the same run, without and then with N orifice
flows (ISO 5167-2, flange taps, each on its own differential-pressure register and on one
of the points' P and T, totals written every pass); the difference is the CPU the flows add,
printed per minute and per flow evaluation (the baseline is the service without flows).
"""

from __future__ import annotations

import argparse
import asyncio
import os
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import aiohttp

ROOT = Path(__file__).resolve().parents[2]
sys.path.insert(0, str(ROOT))

from tests.integration.modbus_server import encode, modbus_server  # noqa: E402

GOAL_CPU = 3.0  # CPU-s per minute (issue 6; --publish and --flows runs)
GOAL_HISTORY = 0.5  # CPU-s per minute added by the embedded history
GOAL_RSS = 150.0  # MiB
GOAL_AGE_P95 = 1.2  # s, at a 1 s poll
GOAL_SCRAPE = 0.100  # s of the service's CPU for one full scrape


def goals(points: int) -> tuple[float, float]:
    """(CPU-s/min, peak RSS MiB) for a size (issue 17): 0.8 and 100 at 500 points, 6 and
    150 at 5,000, linear in between and beyond."""
    if points <= 500:
        return 0.8, 100.0
    f = (points - 500) / 4500
    return 0.8 + f * (6.0 - 0.8), 100.0 + f * 50.0


GOAL_PUBLISH = 0.5  # CPU-s per minute added by a publishing channel
EXE = str(Path(sys.executable).parent / "steam-edge")
PROBE_BASE, PROBE_SPAN = 200.0, 400.0  # degC: above Tsat (159-201 degC), never wet steam


def _clock_ticks() -> int:
    return os.sysconf("SC_CLK_TCK")


def cpu_seconds(pid: int) -> float:
    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / _clock_ticks()  # utime + stime


def peak_rss_mib(pid: int) -> float:
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return float("nan")


def values(i: int, second: int) -> tuple[float, float]:
    """Pressure (barg) and temperature (degC) of point i at a given second: superheated
    steam between 5 and 15 barg, wandering a little every second."""
    p = 5.0 + (i % 50) * 0.2 + 0.01 * ((second + i) % 7)
    return p, 240.0 + (i % 30) + 0.1 * ((second * 3 + i) % 11)


def registers(points: int, second: int, flows: int = 0) -> dict[int, int]:
    regs: dict[int, int] = {}
    for i in range(points):
        p, t = values(i, second)
        for k, r in enumerate(encode(p, "float32") + encode(t, "float32")):
            regs[4 * i + k] = r
    for j in range(flows):  # orifice dp in kPa, after the points
        dp = 20.0 + (j % 10) + 0.1 * ((second + j) % 5)
        for k, r in enumerate(encode(dp, "float32")):
            regs[4 * points + 2 * j + k] = r
    return regs


def flow_lines(points: int, flows: int) -> tuple[list[str], list[str]]:
    """(dp tags, flows) for ``flows`` orifice flows on the points."""
    tags, out = [], ["flows:"] if flows else []
    for j in range(flows):
        tags.append(
            f"      - {{name: d{j:04d}, table: holding, address: {4 * points + 2 * j},"
            " type: float32, unit: kPa, reference: differential}"
        )
        out.append(
            f"  - {{name: f{j:04d}, meter: orifice, point: pt{j % points:04d}, dp: d{j:04d},"
            " taps: flange, pipe: 102.26 mm, bore: 60 mm, pipe_material: carbon_steel,"
            " bore_material: stainless_316}"
        )
    return tags, out


def publish_section(url: str) -> list[str]:
    return [
        "publish:",
        "  - name: fleet",
        f"    mqtt: {url}",
        "    username: edge",
        "    password_env: STEAMEDGE_BENCH_MQTT_PASSWORD",
        "    deadband: {pressure: 0.1 bar, temperature: 1 K}",
        "    max_silence: 60 s",
    ]


def config(
    points: int,
    port: int,
    state: Path,
    publish: str | None = None,
    flows: int = 0,
    history: bool = True,
) -> str:
    tags, pts, alarms = [], [], []
    for i in range(points):
        tags.append(
            f"      - {{name: p{i:04d}, table: holding, address: {4 * i}, type: float32,"
            f" unit: bar, reference: gauge}}"
        )
        tags.append(
            f"      - {{name: t{i:04d}, table: holding, address: {4 * i + 2}, type: float32,"
            f" unit: degC}}"
        )
        pts.append(
            f"  - {{name: pt{i:04d}, pressure: p{i:04d}, temperature: t{i:04d},"
            f" state: superheated}}"
        )
        if i % 10 == 0:
            alarms.append(
                f"  - {{name: pt{i:04d}-superheat-low, signal: pt{i:04d}.superheat,"
                f" low: 5 K, deadband: 1 K, on_delay: 10 s, priority: high}}"
            )
    return "\n".join(
        [
            "version: 1",
            "site: bench-works",
            "barometer: {altitude: 120 m}",
            "sources:",
            "  - name: plant-plc",
            "    protocol: modbus-tcp",
            "    host: 127.0.0.1",
            f"    port: {port}",
            "    interval: 1 s",
            "    timeout: 800 ms",
            "    tags:",
            *tags,
            *flow_lines(points, flows)[0],
            "points:",
            *pts,
            *flow_lines(points, flows)[1],
            "alarms:",
            *alarms,
            "http: {listen: '127.0.0.1:0'}",
            f"storage: {{path: {state}}}"
            if history
            else f"storage: {{path: {state}, history: {{enabled: false}}}}",
            *(publish_section(publish) if publish else []),
            "",
        ]
    )


BASELINE = textwrap.dedent(
    """
    import asyncio, struct, sys, time
    from pymodbus.client import AsyncModbusTcpClient
    async def main(port, registers, seconds):
        client = AsyncModbusTcpClient("127.0.0.1", port=port, timeout=1)
        await client.connect()
        end = time.monotonic() + seconds
        while time.monotonic() < end:
            t0 = time.monotonic()
            for start in range(0, registers, 124):
                n = min(124, registers - start)
                rr = await client.read_holding_registers(start, count=n, device_id=1)
                raw = struct.pack(">%dH" % n, *rr.registers)
                struct.unpack(">%df" % (n // 2), raw)
            await asyncio.sleep(max(0.0, 1.0 - (time.monotonic() - t0)))
        client.close()
    asyncio.run(main(int(sys.argv[1]), int(sys.argv[2]), float(sys.argv[3])))
    """
)


PROBE_QUERY = "/metrics?name[]=steamedge_temperature_celsius"
FULL_EVERY = 15  # s


async def _scrape(session: aiohttp.ClientSession, url: str, path: str = "/metrics"):
    async with session.get(url + path) as r:
        text = await r.text()
    return time.time(), text


def probe_value(text: str) -> float | None:
    needle = 'steamedge_temperature_celsius{point="pt0000"} '
    at = text.find(needle)
    if at < 0:
        return None
    return float(text[at + len(needle) : text.index("\n", at)])


def age_of(scraped_at: float, celsius: float) -> float:
    written = celsius - PROBE_BASE
    return (scraped_at % PROBE_SPAN - written) % PROBE_SPAN


async def _writer(server, points: int, stop: asyncio.Event, flows: int = 0) -> None:
    """Every value once per second; the probe register every 20 ms."""
    last_second = -1
    while not stop.is_set():
        now = time.time()
        second = int(now)
        if second != last_second:
            last_second = second
            regs = registers(points, second, flows)
            count = 4 * points + 2 * flows
            await server.set_registers("holding", 0, [regs[a] for a in range(count)])
        probe = PROBE_BASE + now % PROBE_SPAN
        await server.set_registers("holding", 2, encode(probe, "float32"))
        await asyncio.sleep(0.02)


def drain_log(proc: subprocess.Popen[str], counts: dict[str, int]) -> None:
    """Read the service's JSON lines to the end, counting them by event. The pipe must keep
    draining: once it is full, the service's next log write blocks its event loop."""
    import json

    assert proc.stdout is not None
    for line in proc.stdout:
        try:
            event = str(json.loads(line).get("event"))
        except (ValueError, AttributeError):
            event = "(not json)"
        counts[event] = counts.get(event, 0) + 1


async def _wait_url(proc: subprocess.Popen[str], deadline: float) -> str:
    import json

    assert proc.stdout is not None
    while time.monotonic() < deadline:
        line = await asyncio.to_thread(proc.stdout.readline)
        if not line:
            break
        try:
            event = json.loads(line)
        except ValueError:
            continue
        if event.get("event") == "http_listening":
            return event["url"]
    raise SystemExit("steam-edge did not start")


async def run_service(
    points: int,
    seconds: float,
    server_port: int,
    work: Path,
    publish: str | None = None,
    flows: int = 0,
    history: bool = True,
) -> dict:
    cfg = work / "bench.yaml"
    cfg.write_text(config(points, server_port, work / "state.sqlite", publish, flows, history))
    proc = subprocess.Popen(
        [EXE, "run", "-c", str(cfg)],
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )
    log: dict[str, int] = {}
    try:
        url = await _wait_url(proc, time.monotonic() + 120)
        drain = asyncio.ensure_future(asyncio.to_thread(drain_log, proc, log))
        async with aiohttp.ClientSession() as session:
            deadline = time.monotonic() + 60
            while time.monotonic() < deadline:  # warm-up: all points evaluated once
                _, text = await _scrape(session, url)
                if probe_value(text) is not None and f'point="pt{points - 1:04d}"' in text:
                    break
                await asyncio.sleep(0.5)
            await asyncio.sleep(2.0)
            cpu0, t0 = cpu_seconds(proc.pid), time.monotonic()
            ages: list[float] = []
            scrape_times: list[float] = []
            next_at = time.monotonic()
            tick = 0
            while time.monotonic() - t0 < seconds:
                if tick % FULL_EVERY == 0:
                    c0 = cpu_seconds(proc.pid)
                    _, full = await _scrape(session, url)
                    await asyncio.sleep(0.05)  # let the subprocess's CPU count settle
                    scrape_times.append(cpu_seconds(proc.pid) - c0)
                    series = full.count("\n") - full.count("\n#")
                tick += 1
                at, text = await _scrape(session, url, PROBE_QUERY)
                value = probe_value(text)
                if value is not None:
                    ages.append(age_of(at, value))
                next_at += 1.0
                await asyncio.sleep(max(0.0, next_at - time.monotonic()))
            cpu1, t1 = cpu_seconds(proc.pid), time.monotonic()
            rss = peak_rss_mib(proc.pid)
    finally:
        proc.terminate()
        proc.wait(20)
    await asyncio.wait_for(drain, 10)
    ages.sort()
    return {
        "cpu_per_min": (cpu1 - cpu0) / (t1 - t0) * 60.0,
        "rss": rss,
        "ages": ages,
        "scrape": sorted(scrape_times),
        "series": series,
        "window": (t0, t1),
        "log": log,
    }


async def run_baseline(points: int, seconds: float, server_port: int) -> float:
    proc = subprocess.Popen(
        [sys.executable, "-c", BASELINE, str(server_port), str(4 * points), str(seconds + 3)]
    )
    await asyncio.sleep(2.0)  # import and connect
    cpu0, t0 = cpu_seconds(proc.pid), time.monotonic()
    await asyncio.sleep(seconds)
    cpu1, t1 = cpu_seconds(proc.pid), time.monotonic()
    await asyncio.to_thread(proc.wait, 30)
    return (cpu1 - cpu0) / (t1 - t0) * 60.0


def _pct(xs: list[float], q: float) -> float:
    return xs[min(len(xs) - 1, round(q * (len(xs) - 1)))] if xs else float("nan")


async def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--seconds", type=float, default=60.0, help="measured window (default 60)")
    ap.add_argument("--points", type=int, default=500)
    ap.add_argument("--strict", action="store_true", help="exit 1 when a goal is missed")
    ap.add_argument("--publish", action="store_true", help="also measure an MQTT channel")
    ap.add_argument("--flows", type=int, default=0, help="also measure N orifice flows")
    ap.add_argument(
        "--history", action="store_true", help="measure the service without and with history"
    )
    args = ap.parse_args()
    if args.history:
        return await main_history(args)
    if args.publish:
        return await main_publish(args)
    if args.flows:
        return await main_flows(args)
    stop = asyncio.Event()
    async with modbus_server(holding=registers(args.points, int(time.time()))) as server:
        writer = asyncio.create_task(_writer(server, args.points, stop))
        with tempfile.TemporaryDirectory() as tmp:
            svc = await run_service(args.points, args.seconds, server.port, Path(tmp))
        base = await run_baseline(args.points, args.seconds, server.port)
        stop.set()
        await writer
    ages = svc["ages"]
    print(f"service: {args.points} points, {4 * args.points} registers, 1 s poll, "
          f"{args.seconds:g} s window, {svc['series']} series on /metrics")  # fmt: skip
    goal_cpu, goal_rss = goals(args.points)
    scrape = _pct(svc["scrape"], 0.5)
    p95 = _pct(ages, 0.95)
    print(f"  CPU            {svc['cpu_per_min']:.2f} CPU-s/min   (goal <= {goal_cpu:g})")
    print(f"  peak RSS       {svc['rss']:.1f} MiB         (goal <= {goal_rss:g})")
    print(
        f"  value age      p50 {_pct(ages, 0.5):.3f} s, p95 {p95:.3f} s, "
        f"max {_pct(ages, 1.0):.3f} s over {len(ages)} scrapes (goal p95 <= {GOAL_AGE_P95:g})"
    )
    print(
        f"  full scrape    {scrape * 1e3:.0f} ms CPU of the service (median of"
        f" {len(svc['scrape'])}; clock-tick resolution; goal <= {GOAL_SCRAPE * 1e3:.0f})"
    )
    busiest = sorted(svc["log"].items(), key=lambda kv: -kv[1])[:3]
    print(
        f"  log lines      {sum(svc['log'].values())} ({', '.join(f'{k} {n}' for k, n in busiest)})"
    )
    print(f"baseline (bare pymodbus reads of the same registers): {base:.2f} CPU-s/min")
    ratio = svc["cpu_per_min"] / base if base > 0 else float("inf")
    print(f"ratio service/baseline: {ratio:.1f}x")
    print(f"load average: {' '.join(Path('/proc/loadavg').read_text().split()[:3])}")
    ok = svc["cpu_per_min"] <= goal_cpu and svc["rss"] <= goal_rss and p95 <= GOAL_AGE_P95
    ok = ok and scrape <= GOAL_SCRAPE
    print("goals met" if ok else "GOAL MISSED")
    return 0 if ok or not args.strict else 1


async def _count(port: int, arrivals: list[float], stop: asyncio.Event) -> None:
    import aiomqtt

    from tests.integration.mosquitto_server import USERS

    async with aiomqtt.Client(
        "127.0.0.1", port, username="watcher", password=USERS["watcher"]
    ) as client:
        await client.subscribe("#", qos=1)
        async for _ in client.messages:
            arrivals.append(time.monotonic())
            if stop.is_set():
                return


async def main_publish(args: argparse.Namespace) -> int:
    from tests.integration.mosquitto_server import USERS, Broker

    os.environ["STEAMEDGE_BENCH_MQTT_PASSWORD"] = USERS["edge"]
    stop = asyncio.Event()
    with tempfile.TemporaryDirectory() as tmp, Broker(Path(tmp) / "broker") as broker:
        async with modbus_server(holding=registers(args.points, int(time.time()))) as server:
            writer = asyncio.create_task(_writer(server, args.points, stop))
            (Path(tmp) / "a").mkdir()
            (Path(tmp) / "b").mkdir()
            arrivals: list[float] = []
            counter = asyncio.create_task(_count(broker.port, arrivals, stop))
            # both at once, polling the same server: the same load on the machine for both
            plain, pub = await asyncio.gather(
                run_service(args.points, args.seconds, server.port, Path(tmp) / "a"),
                run_service(
                    args.points, args.seconds, server.port, Path(tmp) / "b", publish=broker.url
                ),
            )
            stop.set()
            await writer
            counter.cancel()
    added = pub["cpu_per_min"] - plain["cpu_per_min"]
    print(
        f"service with an MQTT channel: {args.points} points, 1 s poll, {args.seconds:g} s window"
    )
    print(f"  CPU without publishing   {plain['cpu_per_min']:.2f} CPU-s/min")
    print(f"  CPU with publishing      {pub['cpu_per_min']:.2f} CPU-s/min")
    print(f"  added by publishing      {added:.2f} CPU-s/min   (goal <= {GOAL_PUBLISH:g})")
    print(f"  peak RSS with publishing {pub['rss']:.1f} MiB")
    w0, w1 = pub["window"]
    inside = sum(1 for a in arrivals if w0 <= a <= w1)
    rate = inside / (w1 - w0)
    print(f"  messages in the window   {inside} ({rate:.1f}/s); {len(arrivals)} in all, the")
    print("                           first full report at start-up included")
    ok = added <= GOAL_PUBLISH
    print("goal met" if ok else "GOAL MISSED")
    return 0 if ok or not args.strict else 1


async def main_history(args: argparse.Namespace) -> int:
    """Two services at once on one Modbus server, without and with the embedded history
    (issue 14: history writing adds <= 0.5 CPU-s/min)."""
    stop = asyncio.Event()
    async with modbus_server(holding=registers(args.points, int(time.time()))) as server:
        writer = asyncio.create_task(_writer(server, args.points, stop))
        with tempfile.TemporaryDirectory() as tmp:
            (Path(tmp) / "a").mkdir()
            (Path(tmp) / "b").mkdir()
            # both at once, polling the same server: the same load on the machine for both
            off, on = await asyncio.gather(
                run_service(args.points, args.seconds, server.port, Path(tmp) / "a", history=False),
                run_service(args.points, args.seconds, server.port, Path(tmp) / "b"),
            )
            size = sum(f.stat().st_size for f in (Path(tmp) / "b").glob("*.history.sqlite*"))
        stop.set()
        await writer
    added = on["cpu_per_min"] - off["cpu_per_min"]
    print(f"service with history: {args.points} points, 1 s poll, {args.seconds:g} s window")
    print(f"  CPU without history   {off['cpu_per_min']:.2f} CPU-s/min")
    print(f"  CPU with history      {on['cpu_per_min']:.2f} CPU-s/min")
    print(f"  added by history      {added:.2f} CPU-s/min   (goal <= {GOAL_HISTORY:g})")
    print(f"  peak RSS              {off['rss']:.1f} -> {on['rss']:.1f} MiB")
    print(f"  history file          {size / 1e6:.1f} MB after the run")
    ok = added <= GOAL_HISTORY
    print("goal met" if ok else "GOAL MISSED")
    return 0 if ok or not args.strict else 1


async def main_flows(args: argparse.Namespace) -> int:
    stop = asyncio.Event()
    n = args.flows
    regs = registers(args.points, int(time.time()), n)
    async with modbus_server(holding=regs) as server:
        writer = asyncio.create_task(_writer(server, args.points, stop, n))
        with tempfile.TemporaryDirectory() as tmp:
            (Path(tmp) / "a").mkdir()
            plain = await run_service(args.points, args.seconds, server.port, Path(tmp) / "a")
            (Path(tmp) / "b").mkdir()
            with_flows = await run_service(
                args.points, args.seconds, server.port, Path(tmp) / "b", flows=n
            )
        stop.set()
        await writer
    added = with_flows["cpu_per_min"] - plain["cpu_per_min"]
    print(f"service with {n} orifice flows: {args.points} points, 1 s poll, {args.seconds:g} s")
    print(f"  CPU without flows (baseline) {plain['cpu_per_min']:.2f} CPU-s/min")
    print(
        f"  CPU with {n} flows{' ' * (10 - len(str(n)))}{with_flows['cpu_per_min']:.2f} CPU-s/min"
    )
    print(f"  added by the flows           {added:.2f} CPU-s/min")
    print(f"  per flow and pass (1 pass/s) {added / 60.0 / n * 1e6:.0f} us")
    print(f"  peak RSS without / with      {plain['rss']:.1f} / {with_flows['rss']:.1f} MiB")
    ratio = with_flows["cpu_per_min"] / plain["cpu_per_min"] if plain["cpu_per_min"] else 0
    print(f"ratio with/without flows: {ratio:.2f}x")
    ok = with_flows["cpu_per_min"] < GOAL_CPU and with_flows["rss"] < GOAL_RSS
    print("goals met" if ok else "GOAL MISSED")
    return 0 if ok or not args.strict else 1


if __name__ == "__main__":
    sys.exit(asyncio.run(main()))
