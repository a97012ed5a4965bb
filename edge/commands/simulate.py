"""steam-edge simulate: serve the plant simulator over Modbus TCP and OPC UA on loopback.

Scenarios switch while it runs: type a scenario name on stdin, or
``curl -X PUT -d '{"name": "link-drop"}' http://127.0.0.1:15081/scenario``.
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import logging
import signal
import sys
import threading

from edge.sim import scenarios
from edge.sim.runner import SimSettings, Simulator


def add_arguments(parser: argparse.ArgumentParser) -> None:
    d = SimSettings()
    parser.add_argument(
        "--scenario",
        default=d.scenario,
        choices=list(scenarios.SCENARIOS),
        help="scenario to start in (default: %(default)s)",
    )
    parser.add_argument(
        "--speed",
        type=float,
        default=d.speed,
        help="simulated seconds per wall-clock second (default: %(default)s)",
    )
    parser.add_argument("--seed", type=int, default=d.seed, help="noise seed (default: 0)")
    parser.add_argument("--host", default=d.host, help="address to serve on (default: %(default)s)")
    parser.add_argument("--modbus-port", type=int, default=d.modbus_port, metavar="PORT")
    parser.add_argument("--opcua-port", type=int, default=d.opcua_port, metavar="PORT")
    parser.add_argument(
        "--control-port",
        type=int,
        default=d.control_port,
        metavar="PORT",
        help="HTTP control endpoint for switching scenarios; 0 turns it off",
    )
    parser.add_argument("--unit-id", type=int, default=d.unit_id, help="Modbus unit id")
    parser.add_argument(
        "--duration", type=float, default=None, metavar="SECONDS", help="stop after this long"
    )
    parser.epilog = "scenarios: " + "; ".join(
        f"{name}: {s.summary}" for name, s in scenarios.SCENARIOS.items()
    )


def settings_from(args: argparse.Namespace) -> SimSettings:
    return SimSettings(
        host=args.host,
        modbus_port=args.modbus_port,
        opcua_port=args.opcua_port,
        control_port=args.control_port or None,
        unit_id=args.unit_id,
        seed=args.seed,
        scenario=args.scenario,
        speed=args.speed,
    )


def main(args: argparse.Namespace) -> int:
    logging.basicConfig(
        level=logging.INFO, stream=sys.stderr, format="%(levelname)s %(name)s: %(message)s"
    )
    for name in ("asyncua", "pymodbus"):  # their warnings about a loopback test server
        logging.getLogger(name).setLevel(logging.ERROR)
    return asyncio.run(_serve(settings_from(args), args.duration))


def _say(text: str) -> None:
    print(text, flush=True)


def _stdin_lines() -> asyncio.Queue[str]:
    """Lines of stdin, read by a daemon thread (abandoned, not joined, at exit); an empty
    string marks the end of input."""
    loop = asyncio.get_running_loop()
    queue: asyncio.Queue[str] = asyncio.Queue()

    def read() -> None:
        while True:
            try:
                line = sys.stdin.readline()
            except (OSError, ValueError):
                line = ""
            loop.call_soon_threadsafe(queue.put_nowait, line)
            if not line:
                return

    threading.Thread(target=read, name="sim-stdin", daemon=True).start()
    return queue


async def _commands(sim: Simulator, stop: asyncio.Event) -> None:
    """Read scenario names (or ``list``, ``quit``) from stdin, one per line."""
    lines = _stdin_lines()
    while not stop.is_set():
        line = await lines.get()
        if not line:  # end of input: keep serving, stop listening
            return
        word = line.strip()
        if not word:
            continue
        if word in ("quit", "exit"):
            stop.set()
        elif word in ("list", "help", "?"):
            for name, s in scenarios.SCENARIOS.items():
                _say(f"  {name:20} {s.summary}")
        else:
            try:
                s = sim.set_scenario(word.removeprefix("scenario").strip())
                _say(f"scenario {s.name}: {s.summary}")
            except KeyError as exc:
                _say(exc.args[0])


async def _serve(settings: SimSettings, duration: float | None) -> int:
    stop = asyncio.Event()
    loop = asyncio.get_running_loop()
    for sig in (signal.SIGINT, signal.SIGTERM):
        loop.add_signal_handler(sig, stop.set)
    sim = Simulator(settings)
    async with sim:
        s = settings
        _say(f"simulated plant: Kestrel Mill Dyeworks boiler house, scenario {sim.scenario.name}")
        _say(f"  Modbus TCP  {s.host}:{s.modbus_port} (unit id {s.unit_id})")
        _say(f"  OPC UA      {sim.opcua.endpoint} (security None)")
        if s.control_url:
            _say(f"  control     {s.control_url}/scenario")
        _say("ready; type a scenario name to switch, 'list' to list them, Ctrl-C to stop")
        reader = None
        if sys.stdin is not None and not sys.stdin.closed:
            reader = asyncio.create_task(_commands(sim, stop))
        with contextlib.suppress(TimeoutError):
            await asyncio.wait_for(stop.wait(), duration)
        if reader is not None:
            reader.cancel()
    _say("simulator stopped")
    return 0
