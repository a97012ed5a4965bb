"""A small real OPC UA server for tests and benches (asyncua), on 127.0.0.1 only.

In-process::

    server = PlantServer(nodes={"Boiler.DrumPressure": 7.5})
    await server.start()
    server.url, server.node_id("Boiler.DrumPressure")          # "ns=2;s=Boiler.DrumPressure"
    await server.write("Boiler.DrumPressure", 8.1, status="UncertainLastUsableValue")
    await server.stop()

As a subprocess (a test can kill or pause it)::

    python -m tests.integration.opcua_server --port 0 [--count 200 --period 1.0]
        [--cert-dir DIR] [--user NAME --password-env VAR]

prints ``READY <port>`` on stdout once it listens and runs until SIGTERM or SIGINT.
``--count N`` adds N Double variables ``Bench.000`` ... each rewritten once every ``--period``
seconds (spread evenly over the period) with the write time as its source timestamp.
The plant names are invented.
"""

from __future__ import annotations

import argparse
import asyncio
import contextlib
import datetime as dt
import logging
import os
import select
import signal
import socket
import subprocess
import sys
import time
from collections.abc import AsyncIterator, Callable, Mapping
from pathlib import Path
from typing import Any

from asyncua import Server, ua
from asyncua.crypto import cert_gen
from asyncua.crypto.permission_rules import User, UserRole
from cryptography.x509.oid import ExtendedKeyUsageOID

from tests.support import stop_task

NAMESPACE = "urn:steam-edge:test-plant"
SERVER_URI = "urn:steam-edge:test-server"

# Variables of an invented boiler house, by browse path below Objects/Plant.
DEFAULT_NODES: dict[str, Any] = {
    "Boiler.DrumPressure": 7.5,  # bar, gauge
    "Boiler.DrumTemperature": 180.0,  # degC
    "Boiler.FeedFlowCount": ua.Variant(1234, ua.VariantType.Int32),
    "Boiler.Label": "east drum",
    "Boiler.Running": True,
    "Boiler.Levels": [1.0, 2.0],
}


def free_port() -> int:
    """A TCP port on 127.0.0.1 that nobody listened on a moment ago."""
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return int(s.getsockname()[1])


class PasswordUsers:
    """asyncua user manager: a fixed table of user name -> password; anything else refused."""

    def __init__(self, users: Mapping[str, str]) -> None:
        self._users = dict(users)

    def get_user(
        self,
        iserver: Any,
        username: str | None = None,
        password: str | None = None,
        certificate: Any = None,
    ) -> User | None:
        if username is not None and self._users.get(username) == password:
            return User(role=UserRole.User, name=username)
        return None


async def make_server_certificate(cert_dir: Path) -> tuple[Path, Path]:
    """Key (PEM) and self-signed certificate (DER) for the test server, made once per folder."""
    cert_dir.mkdir(parents=True, exist_ok=True)
    key, cert = cert_dir / "server_key.pem", cert_dir / "server_cert.der"
    await cert_gen.setup_self_signed_certificate(
        key,
        cert,
        SERVER_URI,
        socket.gethostname(),
        [ExtendedKeyUsageOID.SERVER_AUTH, ExtendedKeyUsageOID.CLIENT_AUTH],
        {},
    )
    return key, cert


class PlantServer:
    """A running asyncua server with named Double/Int/String variables under Objects/Plant."""

    def __init__(
        self,
        port: int = 0,
        *,
        nodes: Mapping[str, Any] | None = None,
        count: int = 0,
        cert_dir: Path | None = None,
        users: Mapping[str, str] | None = None,
    ) -> None:
        self.port = port
        self._initial = dict(DEFAULT_NODES if nodes is None else nodes)
        self._initial.update({bench_name(i): 0.0 for i in range(count)})
        self.count = count
        self.cert_dir = cert_dir
        self.users = dict(users) if users else None
        self.server = Server(user_manager=PasswordUsers(self.users) if self.users else None)
        self.ns = 0
        self._nodes: dict[str, ua.NodeId] = {}
        self.certificate: Path | None = None  # server certificate (DER), when cert_dir is set

    @property
    def url(self) -> str:
        return f"opc.tcp://127.0.0.1:{self.port}/steam-edge/test"

    def node_id(self, name: str) -> str:
        return f"ns={self.ns};s={name}"

    async def start(self) -> None:
        await self.server.init()
        self.server.set_endpoint(self.url)
        self.server.set_server_name("steam-edge test plant")
        await self.server.set_application_uri(SERVER_URI)
        if self.cert_dir is not None:
            key, self.certificate = await make_server_certificate(self.cert_dir)
            await self.server.load_certificate(str(self.certificate))
            await self.server.load_private_key(str(key))
        else:
            self.server.set_security_policy([ua.SecurityPolicyType.NoSecurity])
        if self.users:
            self.server.set_identity_tokens([ua.UserNameIdentityToken])
        self.ns = await self.server.register_namespace(NAMESPACE)
        plant = await self.server.nodes.objects.add_folder(ua.NodeId("Plant", self.ns), "Plant")
        for name, value in self._initial.items():
            var = await plant.add_variable(ua.NodeId(name, self.ns), name, value)
            self._nodes[name] = var.nodeid
        await self.server.start()
        if self.port == 0:
            assert self.server.bserver is not None
            self.port = self.server.bserver.port

    async def stop(self) -> None:
        await self.server.stop()

    async def write(
        self,
        name: str,
        value: Any,
        *,
        status: str = "Good",
        source_time: dt.datetime | None = None,
        variant_type: ua.VariantType | None = None,
    ) -> None:
        """Set a variable's value, status code (by name) and source timestamp."""
        variant = value if isinstance(value, ua.Variant) else ua.Variant(value, variant_type)
        if source_time is None:
            source_time = dt.datetime.now(dt.UTC)
        dv = ua.DataValue(
            variant,
            StatusCode=ua.StatusCode(getattr(ua.StatusCodes, status)),
            SourceTimestamp=source_time,
            ServerTimestamp=dt.datetime.now(dt.UTC),
        )
        await self.server.write_attribute_value(self._nodes[name], dv)

    async def churn(self, period: float) -> None:
        """Rewrite every bench variable once each ``period`` seconds, spread evenly over the
        period (variable i at phase i/count), each with its write time as source timestamp.
        Spreading makes the wait for the next publishing cycle uniform, whatever the phase
        of a client's subscription."""
        loop = asyncio.get_running_loop()
        start = loop.time()
        tick = 0
        while True:
            for i in range(self.count):
                due = start + (tick + i / self.count) * period
                await asyncio.sleep(max(0.0, due - loop.time()))
                await self.write(bench_name(i), float(tick + i))
            tick += 1


def bench_name(i: int) -> str:
    return f"Bench.{i:03d}"


REPO = Path(__file__).resolve().parents[2]


class Recorder:
    """The ``emit`` a test hands to a source: keeps every Sample, lets a test wait for one."""

    def __init__(self) -> None:
        self.samples: list[Any] = []
        self._arrived = asyncio.Event()

    def __call__(self, batch: list[Any]) -> None:
        self.samples.extend(batch)
        self._arrived.set()

    def mark(self) -> int:
        return len(self.samples)

    async def wait_for(
        self, check: Callable[[Any], bool], timeout: float = 5.0, since: int | None = None
    ) -> Any:
        """The first Sample from ``since`` on (default: from now) for which ``check`` holds."""
        i = self.mark() if since is None else since
        deadline = time.monotonic() + timeout
        while True:
            while i < len(self.samples):
                if check(self.samples[i]):
                    return self.samples[i]
                i += 1
            left = deadline - time.monotonic()
            if left <= 0:
                tail = "\n".join(map(str, self.samples[-8:]))
                raise AssertionError(f"no matching sample within {timeout} s; last:\n{tail}")
            self._arrived.clear()
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(self._arrived.wait(), left)


@contextlib.asynccontextmanager
async def running(source: Any) -> AsyncIterator[Recorder]:
    """Run ``source.run`` in a task for the ``with`` block; fail if it raised."""
    rec = Recorder()
    task = asyncio.create_task(source.run(rec))
    try:
        yield rec
    finally:
        if task.done():
            task.result()  # a source must never end by itself
        await stop_task(task)


class ServerProcess:
    """The server in a child process, so a test can kill, pause and restart it."""

    def __init__(self, *args: str, env: Mapping[str, str] | None = None) -> None:
        self.args = list(args)
        self.env = {**os.environ, **(env or {})}
        self.port = 0
        self.proc: subprocess.Popen[bytes] | None = None

    @property
    def url(self) -> str:
        return f"opc.tcp://127.0.0.1:{self.port}/steam-edge/test"

    def start(self, timeout: float = 30.0) -> None:
        """Start (or restart, on the same port) and wait for READY."""
        cmd = [sys.executable, "-m", "tests.integration.opcua_server", "--port", str(self.port)]
        self.proc = subprocess.Popen(
            [*cmd, *self.args], cwd=REPO, env=self.env, stdout=subprocess.PIPE
        )
        assert self.proc.stdout is not None
        deadline = time.monotonic() + timeout
        line = b""
        while not line.endswith(b"\n"):
            left = deadline - time.monotonic()
            if left <= 0 or self.proc.poll() is not None:
                self.kill()
                raise RuntimeError(f"test OPC UA server did not start: {line!r}")
            ready, _, _ = select.select([self.proc.stdout], [], [], left)
            if ready:
                line += os.read(self.proc.stdout.fileno(), 1)
        self.port = int(line.split()[1])

    def kill(self) -> None:
        """SIGKILL: the server vanishes without closing anything."""
        if self.proc is not None and self.proc.poll() is None:
            self.proc.send_signal(signal.SIGCONT)
            self.proc.kill()
        if self.proc is not None:
            self.proc.wait(timeout=10)
            if self.proc.stdout is not None:
                self.proc.stdout.close()

    def pause(self) -> None:
        assert self.proc is not None
        self.proc.send_signal(signal.SIGSTOP)

    def resume(self) -> None:
        assert self.proc is not None
        self.proc.send_signal(signal.SIGCONT)


async def _serve(args: argparse.Namespace) -> None:
    users = None
    if args.user:
        users = {args.user: os.environ[args.password_env]}
    server = PlantServer(
        args.port,
        count=args.count,
        cert_dir=Path(args.cert_dir) if args.cert_dir else None,
        users=users,
    )
    await server.start()
    stop = asyncio.Event()
    loop = asyncio.get_running_loop()
    for sig in (signal.SIGTERM, signal.SIGINT):
        loop.add_signal_handler(sig, stop.set)
    churn = asyncio.create_task(server.churn(args.period)) if args.count else None
    print(f"READY {server.port}", flush=True)
    try:
        await stop.wait()
    finally:
        if churn is not None:
            churn.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await churn
        await server.stop()


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(prog="python -m tests.integration.opcua_server")
    parser.add_argument("--port", type=int, default=0)
    parser.add_argument("--count", type=int, default=0, help="bench variables to rewrite")
    parser.add_argument("--period", type=float, default=1.0, help="seconds between rewrites")
    parser.add_argument("--cert-dir", help="folder for the server key and certificate")
    parser.add_argument("--user", help="the one user name accepted")
    parser.add_argument("--password-env", default="TEST_OPCUA_PASSWORD")
    logging.basicConfig(level=logging.ERROR)
    asyncio.run(_serve(parser.parse_args(argv)))
    return 0


if __name__ == "__main__":
    sys.exit(main())
