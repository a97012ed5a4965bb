"""Publishing to a real mosquitto: JSON and Sparkplug B payloads as a subscriber sees them,
sequence numbers without a gap, TLS with a pinned CA, a wrong password, and a 10 s broker
outage that loses no alarm event.

The monitor runs in-process against the Modbus test server; the subscriber is an aiomqtt
client with its own login; Sparkplug B payloads are decoded with the specification's schema
(sparkplug_b.proto, compiled by protoc at test time)."""

from __future__ import annotations

import asyncio
import contextlib
import json
import ssl
import time
from collections.abc import AsyncIterator
from pathlib import Path
from typing import Any

import aiomqtt
import pytest
from structlog.testing import capture_logs

from tests.integration.modbus_server import encode, modbus_server
from tests.integration.mosquitto_server import USERS, Broker, make_pki
from tests.integration.servicekit import DRUM_T, registers, running_monitor, write_config
from tests.integration.sparkplug_schema import parse
from tests.support import until

pytestmark = [pytest.mark.slow, pytest.mark.asyncio]

POINT_KEYS = {
    "type",
    "name",
    "time",
    "source_time",
    "quality",
    "reason",
    "state",
    "phase",
    "hints",
    "values",
    "site",
    "session",
    "seq",
    "sent",
    "stored",
}
ALARM_KEYS = {
    "type",
    "name",
    "time",
    "id",
    "kind",
    "priority",
    "state",
    "value",
    "limit",
    "quality",
    "message",
    "user",
    "comment",
    "site",
    "session",
    "seq",
    "sent",
    "stored",
}


def publish_section(url: str, **keys: Any) -> str:
    lines = [
        "publish:",
        "  - name: fleet",
        f"    mqtt: {url}",
        "    username: edge",
        "    password_env: STEAMEDGE_TEST_MQTT_PASSWORD",
        "    backoff_max: 1 s",
        "    deadband: {pressure: 0.05 bar, temperature: 0.5 K}",
    ]
    lines += [f"    {k}: {v}" for k, v in keys.items()]
    return "\n".join(lines) + "\n"


def config(tmp: Path, port: int, url: str, **keys: Any) -> Path:
    path = write_config(tmp / "edge.yaml", port)
    path.write_text(path.read_text() + publish_section(url, **keys))
    return path


class Watcher:
    """A subscriber on '#' that keeps every message (topic, payload, retain)."""

    def __init__(self, broker: Broker, *, tls: ssl.SSLContext | None = None, **kw: Any):
        self.broker, self.tls, self.kw = broker, tls, kw
        self.messages: list[tuple[str, bytes, bool]] = []
        self.client: aiomqtt.Client | None = None
        self._task: asyncio.Task[None] | None = None
        self.subscribed = asyncio.Event()

    def on(self, prefix: str) -> list[tuple[str, bytes]]:
        return [(t, p) for t, p, _ in self.messages if t.startswith(prefix)]

    async def _run(self) -> None:
        while True:
            try:
                async with aiomqtt.Client(
                    "127.0.0.1",
                    self.broker.port,
                    username="watcher",
                    password=USERS["watcher"],
                    tls_context=self.tls,
                    **self.kw,
                ) as client:
                    self.client = client
                    await client.subscribe("#", qos=1)
                    self.subscribed.set()
                    async for m in client.messages:
                        payload = m.payload if isinstance(m.payload, bytes) else b""
                        self.messages.append((str(m.topic), payload, bool(m.retain)))
            except aiomqtt.MqttError:
                self.client = None
                self.subscribed.clear()
                await asyncio.sleep(0.05)

    async def __aenter__(self) -> Watcher:
        self._task = asyncio.create_task(self._run())
        await asyncio.wait_for(self.subscribed.wait(), 10)
        return self

    async def __aexit__(self, *exc: object) -> None:
        assert self._task is not None
        self._task.cancel()
        with contextlib.suppress(BaseException):
            await asyncio.wait_for(self._task, 5)


@pytest.fixture
def password(monkeypatch):
    monkeypatch.setenv("STEAMEDGE_TEST_MQTT_PASSWORD", USERS["edge"])
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", "test-token-7f3a9c")


@contextlib.asynccontextmanager
async def plant() -> AsyncIterator[Any]:
    async with modbus_server(holding=registers()) as server:
        yield server


def json_seqs(messages: list[tuple[str, bytes]]) -> dict[int, list[int]]:
    """seq per session in arrival order; a repeat of the same (session, seq) is the broker
    delivering a QoS 1 message again to the subscriber (MQTT 3.1.1, 4.3.2: at least once),
    not a new message, and is counted once."""
    out: dict[int, list[int]] = {}
    seen: set[tuple[int, int]] = set()
    for _, payload in messages:
        body = json.loads(payload)
        if body["type"] == "death":
            continue
        key = (body["session"], body["seq"])
        if key not in seen:
            seen.add(key)
            out.setdefault(body["session"], []).append(body["seq"])
    return out


async def test_json_messages_reach_a_subscriber_with_the_documented_fields(tmp_path, password):
    """Birth (retained, advisory notice), point and source messages with the README's fields;
    the drum's absolute pressure is 9 barg + the 97 kPa barometer tag; seq without a gap."""
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server, Watcher(broker) as w:
            cfg = config(tmp_path, server.port, broker.url)
            async with running_monitor(cfg, http=False):
                await until(lambda: _good(w, "drum"), 10)
                await until(lambda: w.on("steam-edge/riverside-laundry/sources/"), 10)
            status = [p for t, p in w.on("steam-edge/riverside-laundry/status")]
    birth, death = json.loads(status[0]), json.loads(status[-1])
    assert birth["online"] is True and "advisory only" in birth["notice"]
    assert birth["points"] == ["drum", "hp_header"] and birth["seq"] == 0
    assert death["online"] is False and death["session"] == birth["session"]
    drum = [json.loads(p) for _, p in w.on("steam-edge/riverside-laundry/points/drum")]
    good = [d for d in drum if d["quality"] == "good"]
    assert set(drum[0]) == POINT_KEYS
    # 9 bar gauge + 97 kPa (barometer tag) = 997 kPa absolute
    assert good and good[-1]["values"]["pressure"]["value"] == pytest.approx(997_000.0, abs=1)
    assert good[-1]["values"]["pressure"]["unit"] == "Pa"
    assert isinstance(good[-1]["source_time"], int)
    # 190 degC at 997 kPa: above Tsat, about 179.8 degC (IAPWS-IF97 Table 36: 453.04 K at 1 MPa)
    assert good[-1]["phase"] == "superheated"
    source = json.loads(w.on("steam-edge/riverside-laundry/sources/boiler-plc")[-1][1])
    assert source["up"] is True
    for seqs in json_seqs(w.on("steam-edge/riverside-laundry/")).values():
        assert seqs == list(range(len(seqs)))  # 0 (birth), 1, 2, ... no gap


async def test_sparkplug_b_session_decoded_with_the_spec_schema(tmp_path, password):
    """NBIRTH (seq 0, bdSeq 0, Rebirth false), a DBIRTH per point, DDATA by alias; seq +1
    per message without a gap; a rebirth command gets NBIRTH again; a clean stop NDEATH
    with the same bdSeq (Eclipse Sparkplug 3.0, chapter 4 and 5)."""
    ns = "spBv1.0/plant-fleet"
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server, Watcher(broker) as w:
            cfg = config(
                tmp_path, server.port, broker.url, format="sparkplug-b", group="plant-fleet"
            )
            async with running_monitor(cfg, http=False):
                await until(lambda: w.on(f"{ns}/DBIRTH/riverside-laundry/hp_header"), 10)
                await server.set_registers("holding", DRUM_T, encode(195.0, "float32"))
                await until(lambda: w.on(f"{ns}/DDATA/riverside-laundry/drum"), 10)
                cmd = _rebirth_command()
                assert w.client is not None
                await w.client.publish(f"{ns}/NCMD/riverside-laundry", cmd, qos=0)
                await until(lambda: len(w.on(f"{ns}/NBIRTH/")) == 2, 10)
                await until(lambda: len(w.on(f"{ns}/DBIRTH/")) == 4, 10)
            await until(lambda: w.on(f"{ns}/NDEATH/"), 10)
    births = [parse(p) for _, p in w.on(f"{ns}/NBIRTH/")]
    names = {m.name: m for m in births[0].metrics}
    assert births[0].seq == 0 and names["bdSeq"].long_value == 0
    assert names["Node Control/Rebirth"].boolean_value is False
    assert "advisory only" in names["Properties/Advisory notice"].string_value
    ddata = parse(w.on(f"{ns}/DDATA/riverside-laundry/drum")[0][1])
    assert all(not m.name and m.alias for m in ddata.metrics)
    death = parse(w.on(f"{ns}/NDEATH/")[-1][1])
    assert [(m.name, m.long_value) for m in death.metrics] == [("bdSeq", 0)]
    seq = [parse(p).seq for t, p in w.on(f"{ns}/") if "/NDEATH/" not in t and "/NCMD/" not in t]
    restart = seq.index(0, 1)  # the rebirth starts again at 0
    for part in (seq[:restart], seq[restart:]):
        assert part == [i % 256 for i in range(len(part))]


def _rebirth_command() -> bytes:
    from tests.integration.sparkplug_schema import sparkplug_pb2

    pb = sparkplug_pb2()
    cmd = pb.Payload(timestamp=1)
    m = cmd.metrics.add()
    m.name, m.datatype, m.boolean_value = "Node Control/Rebirth", 11, True
    return cmd.SerializeToString()


async def test_tls_with_a_pinned_ca(tmp_path, password):
    """mqtts:// with the broker's CA pinned: connected, the birth arrives."""
    pki = make_pki(tmp_path / "pki")
    with Broker(tmp_path / "broker", tls=pki) as broker:
        ctx = ssl.create_default_context(cafile=str(pki.ca))
        async with plant() as server, Watcher(broker, tls=ctx) as w:
            cfg = config(tmp_path, server.port, broker.url, ca=str(pki.ca))
            async with running_monitor(cfg, http=False) as monitor:
                await until(lambda: w.on("steam-edge/riverside-laundry/points/drum"), 10)
                assert monitor.publishers.channels["fleet"].connected


async def test_a_server_from_another_ca_is_refused_and_retried(tmp_path, password):
    """A broker whose certificate the pinned CA did not issue: one error line per try
    naming TLS, retried, nothing sent."""
    pki, other = make_pki(tmp_path / "pki"), make_pki(tmp_path / "other", "other")
    with Broker(tmp_path / "broker", tls=pki) as broker:
        async with plant() as server:
            cfg = config(tmp_path, server.port, broker.url, ca=str(other.ca))
            with capture_logs() as logs:
                async with running_monitor(cfg, http=False) as monitor:
                    failed = lambda: [e for e in logs if e["event"] == "publish_connect_failed"]  # noqa: E731
                    await until(lambda: len(failed()) >= 2, 10)
                    ch = monitor.publishers.channels["fleet"]
                    assert not ch.connected and ch.published == 0
    assert all("TLS failed" in e["error"] for e in failed())


async def test_wrong_password_is_one_line_and_a_retry(tmp_path, monkeypatch):
    """A refused login: one error line per attempt saying so, retried, the monitor runs on."""
    monkeypatch.setenv("STEAMEDGE_TEST_MQTT_PASSWORD", "not-the-password")
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", "test-token-7f3a9c")
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server:
            cfg = config(tmp_path, server.port, broker.url)
            with capture_logs() as logs:
                async with running_monitor(cfg, http=False) as monitor:
                    failed = lambda: [e for e in logs if e["event"] == "publish_connect_failed"]  # noqa: E731
                    await until(lambda: len(failed()) >= 2, 10)
                    assert monitor.alive() and monitor.evaluations > 0
    first = failed()[0]
    assert first["log_level"] == "error" and "refused the login" in first["error"]
    assert "retry_in" in first and first["broker"] == f"127.0.0.1:{broker.port}"
    assert not [e for e in logs if e.get("exc_info") or e["log_level"] == "critical"]


async def test_broker_down_10_s_loses_no_alarm_event(tmp_path, password):
    """The broker killed for 10 s while alarms are raised, acknowledged and cleared: after it
    returns every journalled event arrives, in order, marked stored; seq has no gap."""
    with Broker(tmp_path / "broker", persistent=True) as broker:
        async with (
            plant() as server,
            Watcher(broker, identifier="watcher-1", clean_session=False) as w,
        ):
            cfg = config(tmp_path, server.port, broker.url)
            async with running_monitor(cfg, http=False) as monitor:
                ch = monitor.publishers.channels["fleet"]
                await until(lambda: w.on("steam-edge/riverside-laundry/points/drum"), 10)
                await asyncio.sleep(1.2)  # the broker saves the watcher's session
                broker.kill()
                down = time.monotonic()
                await until(lambda: not ch.connected, 5)
                for k in range(3):  # superheat 2 K < 5 K: raised; back to 10 K: cleared
                    await server.set_registers("holding", DRUM_T, encode(182.0, "float32"))
                    await until(lambda k=k: _kinds(monitor).count("raised") > k, 5)
                    await monitor.act("ack", "drum-superheat-low", user="jo")
                    await server.set_registers("holding", DRUM_T, encode(190.0, "float32"))
                    await until(lambda k=k: _kinds(monitor).count("cleared") > k, 5)
                queued = ch.queue.size
                await asyncio.sleep(max(0.0, 10.0 - (time.monotonic() - down)))  # 10 s down
                broker.start()
                journal = [e.id for e in monitor.events(0, 1000)]
                await until(lambda: _alarm_ids(w) >= set(journal), 15)
    ids = [json.loads(p)["id"] for _, p in w.on("steam-edge/riverside-laundry/alarms/")]
    assert queued >= 9 and len(journal) >= 9
    first = list(dict.fromkeys(i for i in ids if i in journal))  # a QoS 1 repeat counts once
    assert first == journal, (ids, journal)  # every one, in journal order
    bodies = [json.loads(p) for _, p in w.on("steam-edge/riverside-laundry/alarms/")]
    assert all(b["stored"] for b in bodies if b["id"] in journal)  # they waited out the outage
    for session, seqs in json_seqs(w.on("steam-edge/riverside-laundry/")).items():
        assert seqs == list(range(len(seqs))), (session, seqs)


def _good(w: Watcher, point: str) -> bool:
    msgs = w.on(f"steam-edge/riverside-laundry/points/{point}")
    return any(json.loads(p)["quality"] == "good" for _, p in msgs)


def _kinds(monitor: Any) -> list[str]:
    return [e.kind for e in monitor.events(0, 1000)]


def _alarm_ids(w: Watcher) -> set[int]:
    return {json.loads(p)["id"] for _, p in w.on("steam-edge/riverside-laundry/alarms/")}


async def test_sparkplug_waits_for_the_primary_host_and_leaves_when_it_goes(tmp_path, password):
    """With primary_host: no NBIRTH while its STATE says offline; the birth once it says
    online; its offline STATE ends the session (NDEATH), its return starts the next one with
    the next bdSeq (Sparkplug 3.0, message-flow-edge-node-birth-publish-phid-wait and
    operational-behavior-edge-node-termination-host-offline)."""
    ns, state = "spBv1.0/plant-fleet", "spBv1.0/STATE/scada-main"
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server, Watcher(broker) as w:
            assert w.client is not None

            async def host(online: bool, stamp: int) -> None:
                body = json.dumps({"online": online, "timestamp": stamp}).encode()
                await w.client.publish(state, body, qos=1, retain=True)

            await host(False, 1)
            cfg = config(
                tmp_path,
                server.port,
                broker.url,
                format="sparkplug-b",
                group="plant-fleet",
                primary_host="scada-main",
            )
            async with running_monitor(cfg, http=False) as monitor:
                ch = monitor.publishers.channels["fleet"]
                await until(lambda: ch.connected, 10)
                await asyncio.sleep(1.0)
                assert not w.on(f"{ns}/NBIRTH/")
                await host(True, 2)
                await until(lambda: w.on(f"{ns}/NBIRTH/"), 10)
                await host(False, 3)
                await until(lambda: w.on(f"{ns}/NDEATH/"), 10)
                await host(True, 4)
                await until(lambda: len(w.on(f"{ns}/NBIRTH/")) == 2, 10)
    bd = [
        {m.name: m for m in parse(p).metrics}["bdSeq"].long_value for _, p in w.on(f"{ns}/NBIRTH/")
    ]
    assert bd == [0, 1]


async def test_channel_figures_on_metrics(tmp_path, password):
    """/metrics has connected, queued, published and dropped for the channel."""
    from edge.web.metrics import families

    with Broker(tmp_path / "broker") as broker:
        async with plant() as server, Watcher(broker) as w:
            cfg = config(tmp_path, server.port, broker.url)
            async with running_monitor(cfg, http=False) as monitor:
                await until(lambda: _good(w, "drum"), 10)
                fams = {f.name: f for f in families(monitor.live_view())}
    samples = {n: {v: x for _, v, x in fams[n].samples} for n in fams if "publish" in n}
    assert samples["steamedge_publish_connected"] == {("fleet",): 1.0}
    assert samples["steamedge_publish_messages"][("fleet",)] >= 3  # birth, points, source
    assert samples["steamedge_publish_dropped"] == {
        ("fleet", "value"): 0.0,
        ("fleet", "alarm"): 0.0,
    }
    assert ("fleet",) in samples["steamedge_publish_queued"]


async def test_a_broker_that_never_answers_does_not_hold_up_the_evaluation(tmp_path, password):
    """A listener that accepts and never answers: the channel times out and retries while
    evaluation passes go on at the source's pace and values queue up."""
    held: list[asyncio.StreamWriter] = []

    async def accept(_r: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        held.append(writer)  # never a CONNACK

    mute = await asyncio.start_server(accept, "127.0.0.1", 0)
    port = mute.sockets[0].getsockname()[1]
    try:
        async with plant() as server:
            cfg = config(tmp_path, server.port, f"mqtt://127.0.0.1:{port}", timeout="1 s")
            async with running_monitor(cfg, http=False) as monitor:
                ch = monitor.publishers.channels["fleet"]
                await until(lambda: held, 5)
                before = monitor.evaluations
                await asyncio.sleep(2.0)
                passes = monitor.evaluations - before
                assert not ch.connected and ch.queue.size > 0
    finally:
        for w in held:
            w.close()
        mute.close()
    assert passes >= 8  # a 200 ms source: about 10 passes in 2 s


async def test_reload_restarts_a_changed_channel_with_a_new_birth(tmp_path, password):
    """A reload that changes the channel's deadband restarts it: a new session with its own
    birth; the old session ends with its death, the monitor keeps running."""
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server, Watcher(broker) as w:
            cfg = config(tmp_path, server.port, broker.url)
            async with running_monitor(cfg, http=False) as monitor:
                status = "steam-edge/riverside-laundry/status"
                await until(lambda: w.on(status), 10)
                cfg.write_text(cfg.read_text().replace("temperature: 0.5 K", "temperature: 1 K"))
                summary = await monitor.reload()
                await until(lambda: len(w.on(status)) >= 3, 10)
                assert monitor.publishers.channels["fleet"].cfg.deadband.temperature == 1.0
    assert summary["publish_restarted"] == ["fleet"]
    kinds = [(json.loads(p)["type"], json.loads(p)["session"]) for _, p in w.on(status)][:3]
    assert kinds == [("birth", 0), ("death", 0), ("birth", 1)]


async def test_mqtt_5_session(tmp_path, password):
    """protocol: 5 connects with MQTT 5 (clean start), and the messages arrive the same."""
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server, Watcher(broker) as w:
            cfg = config(tmp_path, server.port, broker.url, protocol=5)
            async with running_monitor(cfg, http=False):
                await until(lambda: _good(w, "drum"), 10)
    birth = json.loads(w.on("steam-edge/riverside-laundry/status")[0][1])
    assert birth["online"] is True and birth["seq"] == 0


async def test_mqtt_5_wrong_password_is_one_line(tmp_path, monkeypatch):
    """With MQTT 5 the broker's 'bad user name or password' is the same one clear line."""
    monkeypatch.setenv("STEAMEDGE_TEST_MQTT_PASSWORD", "not-the-password")
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", "test-token-7f3a9c")
    with Broker(tmp_path / "broker") as broker:
        async with plant() as server:
            cfg = config(tmp_path, server.port, broker.url, protocol=5)
            with capture_logs() as logs:
                async with running_monitor(cfg, http=False):
                    failed = lambda: [e for e in logs if e["event"] == "publish_connect_failed"]  # noqa: E731
                    await until(lambda: len(failed()) >= 2, 10)
    assert all("refused the login" in e["error"] for e in failed())


async def test_sparkplug_after_an_outage_rebirths_then_sends_the_stored_events(tmp_path, password):
    """Broker down 3 s while an alarm is raised: on return a new NBIRTH (bdSeq 1, seq 0) and
    DBIRTHs, then the stored events as NDATA with is_historical and their journal ids, seq
    one more per message (Sparkplug 3.0; the 10 s outage is the JSON test's)."""
    ns = "spBv1.0/plant-fleet"
    with Broker(tmp_path / "broker", persistent=True) as broker:
        async with (
            plant() as server,
            Watcher(broker, identifier="watcher-2", clean_session=False) as w,
        ):
            cfg = config(
                tmp_path, server.port, broker.url, format="sparkplug-b", group="plant-fleet"
            )
            async with running_monitor(cfg, http=False) as monitor:
                ch = monitor.publishers.channels["fleet"]
                await until(lambda: w.on(f"{ns}/DBIRTH/riverside-laundry/hp_header"), 10)
                await asyncio.sleep(1.2)  # the broker saves the watcher's session
                broker.kill()
                await until(lambda: not ch.connected, 5)
                await server.set_registers("holding", DRUM_T, encode(182.0, "float32"))
                await until(lambda: "raised" in _kinds(monitor), 5)
                await asyncio.sleep(1.5)
                broker.start()
                await until(lambda: len(w.on(f"{ns}/NBIRTH/")) == 2, 15)
                raised = [e.id for e in monitor.events(0, 100) if e.kind == "raised"]
                alias = {d.name: d.alias for d in ch.node.defs}
                event_id = alias["Alarms/drum-superheat-low/event_id"]

                def stored() -> list:
                    out = []
                    for _, p in w.on(f"{ns}/NDATA/"):
                        for m in parse(p).metrics:
                            if m.alias == event_id and m.is_historical:
                                out.append(m.long_value)
                    return out

                await until(lambda: set(raised) <= set(stored()), 10)
    births = [parse(p) for _, p in w.on(f"{ns}/NBIRTH/")]
    bd = [{m.name: m for m in b.metrics}["bdSeq"].long_value for b in births]
    assert bd == [0, 1] and births[1].seq == 0
    after = w.on(f"{ns}/")
    start = [i for i, (t, _) in enumerate(after) if "/NBIRTH/" in t][1]
    seq = [parse(p).seq for t, p in after[start:] if "/NDEATH/" not in t]
    assert seq == [i % 256 for i in range(len(seq))]
