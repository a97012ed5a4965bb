"""The HTTP side under hostile input (issue 10, items 4, 5 and 10), against a real
``steam-edge run``: a token never reaches the log (real curl, a token file ending in CRLF),
malformed requests are a 400 with at most one short line each (rate-limited), and a flood
of idle connections neither exhausts file descriptors nor starves /metrics."""

from __future__ import annotations

import asyncio
import contextlib
import json
import resource
import socket
import subprocess
import time
from collections.abc import Iterator

import aiohttp
import pytest
from aiohttp import web

from edge.web.server import make_runner
from tests.integration.servicekit import TOKEN, ServiceProcess, write_config

CURL = "curl"


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _low_fd_limit() -> None:
    """systemd's default soft limit of open files for a service (LimitNOFILE=1024)."""
    resource.setrlimit(resource.RLIMIT_NOFILE, (1024, 1024))


@pytest.fixture(scope="module")
def service(tmp_path_factory) -> Iterator[ServiceProcess]:
    """One ``steam-edge run`` for the module, with 1024 open files at most; its PLC is a
    port nobody listens on (the HTTP side is what is tested)."""
    config = write_config(tmp_path_factory.mktemp("http") / "edge.yaml", _free_port())
    proc = ServiceProcess(config, preexec_fn=_low_fd_limit)
    try:
        proc.wait_event("http_listening", 30.0)
        yield proc
    finally:
        proc.stop()


def _log_text(svc: ServiceProcess) -> str:
    return "\n".join(svc.lines + svc.stderr)


def _raw(url: str, request: bytes) -> bytes:
    """Send bytes as they are (no client library to tidy them up); the whole answer."""
    host, port = url.removeprefix("http://").split(":")
    with socket.create_connection((host, int(port)), timeout=5) as s:
        s.sendall(request)
        out = b""
        with contextlib.suppress(TimeoutError):
            while chunk := s.recv(65536):
                out += chunk
    return out


def _post(url: str, path: str, body: bytes) -> tuple[int, dict]:
    request = (
        f"POST {path} HTTP/1.1\r\nHost: x\r\nAuthorization: Bearer {TOKEN}\r\n"
        f"Content-Type: application/json\r\nContent-Length: {len(body)}\r\n"
        "Connection: close\r\n\r\n"
    ).encode() + body
    answer = _raw(url, request)
    head, _, payload = answer.partition(b"\r\n\r\n")
    return int(head.split()[1]), json.loads(payload or b"{}")


@pytest.mark.slow
def test_crlf_token_from_a_file_via_curl_is_refused_and_never_logged(service, tmp_path):
    """curl -H "Authorization: Bearer $(cat token)" with a token file ending in CRLF:
    a 4xx answer, and the token appears in no log line (aiohttp would log the raw header)."""
    token_file = tmp_path / "token"
    token_file.write_bytes(TOKEN.encode() + b"\r\n")
    # what the shell's $(cat token) gives: the trailing LF goes, the CR stays
    header = "Authorization: Bearer " + token_file.read_bytes().decode().rstrip("\n")
    assert header.endswith("\r")
    url = service.url + "/api/v1/alarms/drum-superheat-low/ack"
    run = subprocess.run(
        [CURL, "-s", "-o", "/dev/null", "-w", "%{http_code}", "-X", "POST", "-H", header, url],
        capture_output=True,
        text=True,
        timeout=30,
    )
    assert run.stdout in ("400", "401"), run
    time.sleep(0.3)  # let the service write whatever it writes
    assert TOKEN not in _log_text(service)


@pytest.mark.slow
def test_a_0xff_byte_in_authorization_is_401_not_500(service):
    """A 0xFF byte in the bearer token answers 401 unauthorized (it was a 500)."""
    answer = _raw(
        service.url,
        b"POST /api/v1/reload HTTP/1.1\r\nHost: x\r\nAuthorization: Bearer ab\xffcd\r\n"
        b"Content-Length: 0\r\nConnection: close\r\n\r\n",
    )
    assert answer.split()[1] == b"401"


@pytest.mark.slow
@pytest.mark.parametrize(
    ("path", "body", "detail"),
    [
        ("/api/v1/alarms/drum-superheat-low/ack", b"[" * 1000 + b"]" * 1000, "nested"),
        (
            "/api/v1/alarms/drum-superheat-low/shelve",
            b'{"user": "op", "reason": "r", "duration": 1' + b"0" * 400 + b"}",
            "duration",
        ),
        ("/api/v1/alarms/drum-superheat-low/ack", b'{"user": NaN}', "not JSON"),
    ],
)
def test_malformed_bodies_are_400(service, path, body, detail):
    """JSON nested 1,000 deep, a 400-digit duration, a NaN constant: 400 naming it."""
    status, answer = _post(service.url, path, body)
    assert status == 400 and detail in answer["detail"], answer


@pytest.mark.slow
def test_a_huge_since_is_400(service):
    """GET /api/v1/events?since=99999999999999999999 (beyond SQLite's integers) is 400."""
    answer = _raw(
        service.url,
        b"GET /api/v1/events?since=99999999999999999999 HTTP/1.1\r\nHost: x\r\n"
        b"Connection: close\r\n\r\n",
    )
    assert answer.split()[1] == b"400"


@pytest.mark.slow
def test_300_malformed_requests_write_a_handful_of_short_lines(service):
    """300 requests with a broken header: every one a 400, at most 6 log lines about them
    in all (5 a minute, then one saying how many were held back), none a traceback."""
    before = len(service.lines) + len(service.stderr)
    statuses = set()
    for i in range(300):
        answer = _raw(service.url, f"GET /metrics HTTP/1.1\r\nHost: x\r\nBad{i}\r\n\r\n".encode())
        statuses.add(answer.split()[1] if answer else b"closed")
    time.sleep(0.3)
    new = (service.lines + service.stderr)[before:]
    assert statuses == {b"400"}
    assert len(new) <= 6, new[:10]
    assert not [line for line in new if "Traceback" in line]


@pytest.mark.slow
def test_1100_idle_connections_do_not_starve_metrics(service):
    """1,100 idle connections to a service limited to 1,024 open files: /metrics and
    /healthz still answer 200 at once, and the cap is logged once, not per socket."""
    before = len(service.lines)
    host, port = service.url.removeprefix("http://").split(":")
    idle: list[socket.socket] = []
    try:
        for _ in range(1100):
            idle.append(socket.create_connection((host, int(port)), timeout=5))
        time.sleep(0.5)
        for path in ("/metrics", "/healthz"):
            t0 = time.monotonic()
            answer = _raw(
                service.url,
                f"GET {path} HTTP/1.1\r\nHost: x\r\n\r\n".encode()[:-2]
                + b"Connection: close\r\n\r\n",
            )
            assert answer.split()[1] == b"200", answer[:200]
            assert time.monotonic() - t0 < 5.0
    finally:
        for s in idle:
            s.close()
    capped = [line for line in service.lines[before:] if "http_connection_cap" in line]
    assert 1 <= len(capped) <= 2


@pytest.mark.asyncio
async def test_a_connection_that_sends_nothing_is_closed_after_the_idle_timeout():
    """A socket that never finishes its headers is closed by the server after the idle
    timeout (0.5 s here; 15 s in service), so it cannot hold a file descriptor forever."""
    app = web.Application()
    runner = make_runner(app, idle_timeout=0.5)
    await runner.setup()
    site = web.TCPSite(runner, "127.0.0.1", 0)
    await site.start()
    port = runner.addresses[0][1]
    try:
        reader, writer = await asyncio.open_connection("127.0.0.1", port)
        writer.write(b"GET / HTTP/1.1\r\nHost: x\r\n")  # headers never end
        t0 = time.monotonic()
        async with asyncio.timeout(5):
            assert await reader.read() == b""  # closed by the server
        assert 0.4 < time.monotonic() - t0 < 3.0
        writer.close()
    finally:
        await runner.cleanup()


@pytest.mark.asyncio
async def test_at_the_cap_the_longest_idle_connection_makes_room():
    """With a cap of 4, a fifth connection closes the oldest idle one, and a request on the
    newest is answered."""
    app = web.Application()

    async def ok(_request: web.Request) -> web.Response:
        return web.Response(text="ok")

    app.router.add_get("/", ok)
    runner = make_runner(app, cap=4)
    await runner.setup()
    site = web.TCPSite(runner, "127.0.0.1", 0)
    await site.start()
    port = runner.addresses[0][1]
    conns = []
    try:
        for _ in range(4):
            conns.append(await asyncio.open_connection("127.0.0.1", port))
            await asyncio.sleep(0.02)
        async with aiohttp.ClientSession() as s, s.get(f"http://127.0.0.1:{port}/") as r:
            assert r.status == 200 and await r.text() == "ok"
        async with asyncio.timeout(5):
            assert await conns[0][0].read() == b""  # the oldest was closed
    finally:
        for _, w in conns:
            w.close()
        await runner.cleanup()
