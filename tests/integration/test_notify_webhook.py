"""Webhook delivery against a real aiohttp receiver on 127.0.0.1."""

import asyncio
import datetime
import ipaddress
import sqlite3
import ssl

import pytest
from aiohttp import web

from edge import ADVISORY_NOTICE
from edge.config import Channel
from edge.model import AlarmEvent
from edge.notify import DeliveryFailed, DeliveryWorker, Outbox, OutboxItem, build_channel
from tests.integration.notify_receiver import Receiver
from tests.support import stop_task, until

pytestmark = pytest.mark.asyncio

SITE = "riverside-laundry"
SECRET = "riverside-hook-secret"


def _events(first: int, n: int) -> list[AlarmEvent]:
    return [
        AlarmEvent(
            alarm=f"boiler-{i % 4}",
            kind="raised" if i % 2 else "cleared",
            time=1714564800.0 + i,
            priority="high",
            message=f"event {i}",
            id=i,
            key=f"{SITE}/{i}",
        )
        for i in range(first, first + n)
    ]


@pytest.fixture
def outbox(tmp_path):
    conn = sqlite3.connect(tmp_path / "state.sqlite")
    conn.execute("PRAGMA journal_mode=WAL")
    yield Outbox(conn, site=SITE)
    conn.close()


@pytest.fixture
def secret_env(monkeypatch):
    monkeypatch.setenv("RIVERSIDE_HOOK_SECRET", SECRET)
    return "RIVERSIDE_HOOK_SECRET"


async def _deliver(
    outbox: Outbox, receiver: Receiver, cfg: Channel, events: list[AlarmEvent]
) -> None:
    """Start ``receiver`` and a worker for ``cfg``, queue ``events``, wait until the outbox
    is empty (10 s at most), then stop both."""
    await receiver.start()
    task = asyncio.create_task(DeliveryWorker(outbox, build_channel(cfg)).run())
    try:
        outbox.enqueue([cfg], events)
        assert await until(lambda: outbox.pending(cfg.name) == 0, 10.0)
    finally:
        await stop_task(task)
        await receiver.stop()


async def test_outage_then_flaky_receiver_gets_everything(outbox, secret_env):
    """Down 3 s, then every other request 500: every event arrives, dedupable, signed."""
    receiver = Receiver(SECRET, flaky=True)
    cfg = Channel(
        name="relay",
        webhook=receiver.url,
        secret_env=secret_env,
        group_window="200 ms",
        backoff_max="500 ms",
        timeout="2 s",
    )
    worker = DeliveryWorker(outbox, build_channel(cfg), base_delay=0.1)
    task = asyncio.create_task(worker.run())
    try:
        outbox.enqueue([cfg], _events(1, 10))  # receiver down
        await asyncio.sleep(1.5)
        outbox.enqueue([cfg], _events(11, 10))  # still down
        await asyncio.sleep(1.5)
        await receiver.start()  # 3 s after the first event: up, but flaky
        for burst in range(5):
            outbox.enqueue([cfg], _events(21 + 2 * burst, 2))
            await asyncio.sleep(0.3)
        assert await until(lambda: outbox.pending("relay") == 0, 20.0)
    finally:
        await stop_task(task)
        await receiver.stop()
    expected = [f"{SITE}/{i}" for i in range(1, 31)]
    assert sorted(receiver.accepted) == sorted(expected)  # every one, once after dedup
    assert set(receiver.seen) == set(expected)
    assert receiver.bad_signatures == 0
    assert receiver.answered_500 >= 1 and receiver.duplicates >= 1
    assert worker.failed_attempts >= 3  # refused while down, then 500s
    assert all(m["advisory"] == ADVISORY_NOTICE for m in receiver.messages)
    print(
        f"\nwebhook outage+flaky: requests={receiver.requests} 500s={receiver.answered_500}"
        f" failed_attempts={worker.failed_attempts} duplicates_seen={receiver.duplicates}"
        f" accepted_messages={len(receiver.messages)} events={len(receiver.accepted)}"
    )


async def test_flood_arrives_as_one_message(outbox, secret_env):
    """Fifty events queued at once reach the receiver as a single POST (grouped: 50)."""
    receiver = Receiver(SECRET)
    cfg = Channel(name="relay", webhook=receiver.url, secret_env=secret_env, group_window="300 ms")
    await _deliver(outbox, receiver, cfg, _events(1, 50))
    assert receiver.requests == 1
    assert receiver.messages[0]["grouped"] == 50
    assert len(receiver.accepted) == 50


async def test_single_event_carries_idempotency_key(outbox, secret_env):
    """A message with one event has the event key in Idempotency-Key."""
    receiver = Receiver(SECRET)
    cfg = Channel(name="relay", webhook=receiver.url, secret_env=secret_env, group_window="0 s")
    await _deliver(outbox, receiver, cfg, _events(7, 1))
    assert receiver.headers[0]["Idempotency-Key"] == f"{SITE}/7"


def _item(n: int) -> OutboxItem:
    (e,) = _events(n, 1)
    return OutboxItem(id=n, channel="relay", key=e.key, event=e, site=SITE, created=0.0)


def _self_signed(tmp_path) -> ssl.SSLContext:
    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "127.0.0.1")])
    now = datetime.datetime.now(datetime.UTC)
    cert = (
        x509.CertificateBuilder()
        .subject_name(name)
        .issuer_name(name)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - datetime.timedelta(minutes=5))
        .not_valid_after(now + datetime.timedelta(hours=1))
        .add_extension(
            x509.SubjectAlternativeName([x509.IPAddress(ipaddress.ip_address("127.0.0.1"))]),
            critical=False,
        )
        .sign(key, hashes.SHA256())
    )
    (tmp_path / "cert.pem").write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    (tmp_path / "key.pem").write_bytes(
        key.private_bytes(
            serialization.Encoding.PEM,
            serialization.PrivateFormat.PKCS8,
            serialization.NoEncryption(),
        )
    )
    ctx = ssl.create_default_context(ssl.Purpose.CLIENT_AUTH)
    ctx.load_cert_chain(tmp_path / "cert.pem", tmp_path / "key.pem")
    return ctx


async def _serve(app: web.Application, ssl_context=None) -> tuple[web.AppRunner, int]:
    runner = web.AppRunner(app, access_log=None)
    await runner.setup()
    site = web.TCPSite(runner, "127.0.0.1", 0, ssl_context=ssl_context)
    await site.start()
    return runner, site._server.sockets[0].getsockname()[1]


async def test_https_with_untrusted_certificate_is_refused(tmp_path):
    """https is verified: a self-signed receiver certificate fails the delivery."""
    hits = []

    async def hook(request):
        hits.append(await request.read())
        return web.json_response({})

    app = web.Application()
    app.router.add_post("/hook", hook)
    runner, port = await _serve(app, _self_signed(tmp_path))
    channel = build_channel(Channel(name="tls", webhook=f"https://127.0.0.1:{port}/hook"))
    try:
        with pytest.raises(DeliveryFailed, match="certificate"):
            await channel.deliver([_item(1)])
    finally:
        await channel.aclose()
        await runner.cleanup()
    assert hits == []


async def test_redirect_is_not_followed():
    """A 307 answer is a failed delivery, not a hop to wherever it points."""
    followed = []

    async def hook(request):
        raise web.HTTPTemporaryRedirect("/elsewhere")

    async def elsewhere(request):
        followed.append(1)
        return web.json_response({})

    app = web.Application()
    app.router.add_post("/hook", hook)
    app.router.add_post("/elsewhere", elsewhere)
    runner, port = await _serve(app)
    channel = build_channel(Channel(name="r", webhook=f"http://127.0.0.1:{port}/hook"))
    try:
        with pytest.raises(DeliveryFailed) as info:
            await channel.deliver([_item(1)])
    finally:
        await channel.aclose()
        await runner.cleanup()
    assert info.value.status == 307
    assert followed == []
