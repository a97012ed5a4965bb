"""steam-edge demo: the plant simulator and a monitor in one process, with a live view.

The monitor reads the simulator over real Modbus TCP and OPC UA on loopback, exactly as it
would read a plant. The demo config (config/demo.yaml, shipped in the package) is copied
into a folder per run with this run's listen address, state file, API token variable and,
when a simulator port is taken, another free port.
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import logging
import os
import secrets
import signal
import socket
import sys
import tempfile
from dataclasses import dataclass, field
from importlib import resources
from pathlib import Path
from typing import Any, TextIO
from urllib.parse import urlsplit, urlunsplit

import yaml

from edge import ADVISORY_NOTICE
from edge.errors import ConfigError
from edge.sim import scenarios
from edge.sim.runner import SimSettings

DEFAULT_LISTEN = "127.0.0.1:9847"
DEFAULT_CONTROL_PORT = 15081
TOKEN_ENV = "STEAMEDGE_DEMO_TOKEN"
MQTT_PASSWORD_ENV = "STEAMEDGE_MQTT_PASSWORD"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--scenario",
        default=scenarios.DEFAULT,
        choices=list(scenarios.SCENARIOS),
        help="scenario to start in (default: %(default)s); switch later with the number keys",
    )
    parser.add_argument(
        "--duration",
        type=float,
        default=None,
        metavar="SECONDS",
        help="stop this long after the monitor is up (default: until Ctrl-C)",
    )
    parser.add_argument(
        "--listen",
        default=DEFAULT_LISTEN,
        metavar="HOST:PORT",
        help="where the monitor serves /metrics and the API (default: %(default)s)",
    )
    parser.add_argument(
        "--state",
        default=None,
        metavar="FILE",
        help="state file; its history file sits beside it, so a second run with the same "
        "FILE keeps the trends (default: a temp folder per run)",
    )
    parser.add_argument(
        "--config", default=None, metavar="FILE", help="demo config (default: config/demo.yaml)"
    )
    parser.add_argument(
        "--speed", type=float, default=1.0, help="simulated seconds per second (default: 1)"
    )
    parser.add_argument("--seed", type=int, default=0, help="simulator noise seed (default: 0)")
    parser.add_argument(
        "--plain", action="store_true", help="print plain lines even when stdout is a terminal"
    )
    parser.add_argument(
        "--publish",
        default=None,
        metavar="URL",
        help="also publish the demo plant to this MQTT broker (mqtt:// or mqtts://)",
    )
    parser.add_argument(
        "--publish-format",
        default="json",
        choices=["json", "sparkplug-b"],
        help="message format for --publish (default: %(default)s)",
    )
    parser.add_argument(
        "--publish-user",
        default=None,
        metavar="NAME",
        help=f"MQTT username for --publish; the password is read from {MQTT_PASSWORD_ENV}",
    )
    parser.epilog = "scenarios: " + "; ".join(
        f"{name}: {s.summary}" for name, s in scenarios.SCENARIOS.items()
    )


# --- preparing a run ------------------------------------------------------------------------


@dataclass
class DemoRun:
    """Everything one run uses, decided before anything starts."""

    folder: Path
    config_path: Path  # the per-run copy of the demo config
    state_path: Path
    token: str
    token_env: str
    listen: str
    sim: SimSettings
    notes: list[str] = field(default_factory=list)  # ports moved because they were taken
    publish: list[str] = field(default_factory=list)  # banner lines for --publish


def packaged_config() -> Path:
    return Path(str(resources.files("edge.sim").joinpath("demo.yaml")))


def port_free(host: str, port: int) -> bool:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            s.bind((host, port))
        except OSError:
            return False
    return True


def free_port(host: str) -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as s:
        s.bind((host, 0))
        return int(s.getsockname()[1])


def check_listen(listen: str) -> None:
    """Refuse a --listen address that cannot be served before anything starts (the plant
    simulator takes seconds to build; a taken port should not cost them)."""
    from edge.config.signals import parse_listen

    try:
        host, port = parse_listen(listen)
    except ValueError as exc:
        raise ConfigError(f"--listen: {exc}") from exc
    if port == 0:
        return
    family = socket.AF_INET6 if ":" in host else socket.AF_INET
    with socket.socket(family, socket.SOCK_STREAM) as s:
        s.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        try:
            s.bind((host, port))
        except OSError as exc:
            raise ConfigError(
                f"--listen {listen}: cannot listen there ({exc.strerror}); is a monitor "
                "already running? Choose another address, e.g. --listen 127.0.0.1:9848"
            ) from exc


def _pick(host: str, port: int, what: str, notes: list[str]) -> int:
    if port_free(host, port):
        return port
    new = free_port(host)
    notes.append(f"{what} port {port} is taken; using {new}")
    return new


def _read_yaml(path: Path) -> dict[str, Any]:
    try:
        data = yaml.safe_load(path.read_text(encoding="utf-8"))
    except OSError as exc:
        raise ConfigError(f"{path}: cannot read: {exc.strerror}") from exc
    except yaml.YAMLError as exc:
        raise ConfigError(f"{path}: not valid YAML: {exc}") from exc
    if not isinstance(data, dict):
        raise ConfigError(f"{path}: expected a mapping at the top level")
    return data


def prepare(args: argparse.Namespace, folder: Path | None = None) -> DemoRun:
    """Read the demo config, decide ports, state file and token, write the per-run copy."""
    source = Path(args.config) if args.config else packaged_config()
    data = _read_yaml(source)
    folder = folder or Path(tempfile.mkdtemp(prefix="steam-edge-demo-"))
    notes: list[str] = []
    host, modbus_port, opcua_port = "127.0.0.1", SimSettings().modbus_port, 14840
    for src in data.get("sources") or []:
        if not isinstance(src, dict):
            continue
        if src.get("protocol") == "modbus-tcp":
            host = str(src.get("host", host))
            modbus_port = _pick(host, int(src.get("port", modbus_port)), "Modbus", notes)
            src["port"] = modbus_port
        elif src.get("protocol") == "opcua" and "endpoint" in src:
            url = urlsplit(str(src["endpoint"]))
            opcua_port = _pick(url.hostname or host, url.port or opcua_port, "OPC UA", notes)
            src["endpoint"] = urlunsplit(url._replace(netloc=f"{url.hostname}:{opcua_port}"))
    control_port = _pick(host, DEFAULT_CONTROL_PORT, "simulator control", notes)
    state = Path(args.state).resolve() if args.state else folder / "state.sqlite"
    http = data.setdefault("http", {})
    http["listen"] = args.listen
    token_env = str(http.get("token_env") or TOKEN_ENV)
    http["token_env"] = token_env
    http.pop("token_file", None)
    data.setdefault("storage", {})["path"] = str(state)
    if getattr(args, "publish", None):
        data["publish"] = [publish_entry(args)]
    config_path = folder / "demo.yaml"
    text = f"# per-run copy of {source}, written by steam-edge demo\n"
    config_path.write_text(text + yaml.safe_dump(data, sort_keys=False), encoding="utf-8")
    sim = SimSettings(
        host=host,
        modbus_port=modbus_port,
        opcua_port=opcua_port,
        control_port=control_port,
        scenario=args.scenario,
        speed=args.speed,
        seed=args.seed,
    )
    token = secrets.token_urlsafe(24)
    publish: list[str] = []
    if getattr(args, "publish", None):
        site = str(data.get("site", ""))
        topics = f"steam-edge/{site}/#" if args.publish_format == "json" else "spBv1.0/#"
        publish = [f"{args.publish} ({args.publish_format}); watch with a subscriber on {topics}"]
    return DemoRun(folder, config_path, state, token, token_env, args.listen, sim, notes, publish)


def publish_entry(args: argparse.Namespace) -> dict[str, Any]:
    """The ``publish[]`` entry for ``--publish URL``: the config check judges the URL."""
    entry: dict[str, Any] = {"name": "demo", "mqtt": args.publish, "format": args.publish_format}
    if args.publish_user:
        entry["username"] = args.publish_user
        if os.environ.get(MQTT_PASSWORD_ENV):
            entry["password_env"] = MQTT_PASSWORD_ENV
    if args.publish_format == "json":
        entry["max_silence"] = "30 s"
    return entry


# --- running it -----------------------------------------------------------------------------


def main(args: argparse.Namespace) -> int:
    if args.speed <= 0:
        raise ConfigError("--speed must be above zero")
    if args.duration is not None and args.duration <= 0:
        raise ConfigError("--duration must be above zero")
    check_listen(args.listen)
    run = prepare(args)
    os.environ[run.token_env] = run.token  # the monitor reads its API token from there
    _log_to_files(run.folder)
    plain = args.plain or not sys.stdout.isatty()
    return asyncio.run(_run(run, args.duration, plain))


def _log_to_files(folder: Path) -> None:
    """Keep the terminal for the view: the monitor's JSON lines and the libraries' own
    logging go to files in the run folder."""
    from edge import logs

    stream = (folder / "monitor.log").open("a", encoding="utf-8", buffering=1)
    logs.configure(fmt="json", stream=stream)
    logging.basicConfig(
        filename=str(folder / "simulator.log"),
        level=logging.INFO,
        format="%(asctime)s %(levelname)s %(name)s: %(message)s",
        force=True,
    )
    for name in ("asyncua", "pymodbus"):
        logging.getLogger(name).setLevel(logging.WARNING)


def banner(run: DemoRun, monitor_url: str, sim: Any, out: TextIO) -> None:
    s = run.sim
    lines = [
        f"operator page: {monitor_url}/   (open it in a browser; sign in with the API token)",
        "steam-edge demo: Kestrel Mill Dyeworks boiler house (a simulated plant)",
        ADVISORY_NOTICE,
        *(f"note: {n}" for n in run.notes),
        f"  metrics    {monitor_url}/metrics",
        f"  API        {monitor_url}/api/v1/points   {monitor_url}/api/v1/alarms",
        f"  API token  {run.token}   (Authorization: Bearer <token>, for POSTs)",
        f"  state      {run.state_path}",
        f"  config     {run.config_path}",
        f"  logs       {run.folder / 'monitor.log'}  {run.folder / 'simulator.log'}",
        f"  plant      Modbus TCP {s.host}:{s.modbus_port}, OPC UA {sim.opcua.endpoint}",
        *(f"  publish    {line}" for line in run.publish),
        f'  scenarios  {s.control_url}/scenario   (PUT {{"name": "..."}} to switch)',
        f"  e.g.       curl -s -X POST -H 'Authorization: Bearer {run.token}' "
        f'-d \'{{"user": "me"}}\' {monitor_url}/api/v1/alarms/superheat-low/ack',
    ]
    print("\n".join(lines), file=out, flush=True)


async def _run(run: DemoRun, duration: float | None, plain: bool) -> int:
    from edge.service import Monitor
    from edge.sim.runner import Simulator
    from edge.sim.show import show

    stop = asyncio.Event()
    loop = asyncio.get_running_loop()
    for sig in (signal.SIGINT, signal.SIGTERM):
        loop.add_signal_handler(sig, stop.set)
    print(f"starting the simulated plant (scenario {run.sim.scenario}) and the monitor ...")
    sim = Simulator(run.sim)
    async with sim:
        monitor = Monitor(str(run.config_path))
        await monitor.start()
        try:
            banner(run, monitor.url or f"http://{run.listen}", sim, sys.stdout)
            await show(monitor, sim, stop, duration=duration, plain=plain)
        finally:
            await monitor.stop()
    print("demo stopped", flush=True)
    with contextlib.suppress(Exception):
        for sig in (signal.SIGINT, signal.SIGTERM):
            loop.remove_signal_handler(sig)
    return 0
