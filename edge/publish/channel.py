"""One publishing channel: the MQTT client (aiomqtt) around the pure core.

``offer`` and ``offer_events`` are called from the evaluation pass: they decide by exception
what is due and append it to the channel's SQLite queue, and never wait on the broker. One
owned task connects (the will registered in the CONNECT), subscribes to commands (and to
the primary host's STATE when one is configured), sends the birth, then drains the queue in
order. A lost connection, a refused login or a dead broker is one log line and a retry after
the shared capped backoff; nothing queued is lost by it: a record leaves the queue only once
the broker has it (QoS 1/2: its acknowledgement; QoS 0: a round trip after it, which the
broker answers only after reading everything before it).

    offer()/offer_events() ──> Queue (SQLite, bounded) ──> run(): connect ─> birth ─> drain
                                                           ^                           │
                                                           └── backoff, one log line <─┘
"""

from __future__ import annotations

import asyncio
import contextlib
import json
import os
import random
import re
import ssl
import time
from collections.abc import Callable, Mapping
from typing import Any

import aiomqtt
from paho.mqtt import client as mqtt_client

from edge import ADVISORY_NOTICE, __version__
from edge.backoff import backoff_delay
from edge.config import read_secret
from edge.config.publish import Publish, broker_address, default_topic
from edge.errors import ConfigError, ConfigProblem, StorageError
from edge.logs import get_logger
from edge.model import AlarmEvent, PointState, Sample
from edge.publish.content import Message, Record, alarm_record, ms, point_record, source_record
from edge.publish.exception import Deadband, Reporter
from edge.publish.json_format import JsonNode
from edge.publish.queue import Queue, Queued
from edge.publish.sparkplug import NAMESPACE, SparkplugNode

__all__ = ["PublishChannel", "queue_path"]

BATCH = 200  # records per drain step
BACKOFF_BASE = 1.0  # s before the first reconnect (before jitter)


def queue_path(state_path: str, name: str) -> str:
    """The channel's queue file, beside the state file: ``publish-<name>.sqlite``."""
    safe = re.sub(r"[^A-Za-z0-9_.-]", "_", name)
    return os.path.join(os.path.dirname(os.path.abspath(state_path)), f"publish-{safe}.sqlite")


def tls_context(cfg: Publish, where: str) -> ssl.SSLContext:
    """TLS for mqtts://: with ``ca``, only servers that CA issued are trusted (pinned);
    the host name is checked; an optional client certificate."""
    try:
        ctx = ssl.create_default_context(cafile=cfg.ca) if cfg.ca else ssl.create_default_context()
        if cfg.certificate and cfg.private_key:
            ctx.load_cert_chain(cfg.certificate, cfg.private_key)
    except (OSError, ssl.SSLError) as exc:
        reason = getattr(exc, "strerror", None) or str(exc)
        raise ConfigError(
            [ConfigProblem(where, f"cannot load the certificates: {reason}")]
        ) from exc
    ctx.minimum_version = ssl.TLSVersion.TLSv1_2
    return ctx


def _describe(exc: BaseException) -> str:
    """A broker problem in one line."""
    text = str(exc) or type(exc).__name__
    low = text.lower()
    if "not authori" in low or "bad user name or password" in low or "code:5" in low:
        return f"the broker refused the login ({text}): check username and password"
    if isinstance(exc, ssl.SSLError) or "certificate" in low:
        return f"TLS failed ({text}): check the pinned CA and the broker's certificate"
    return text


class _HostOffline(Exception):
    """The primary host application said it went offline: end the session."""


class PublishChannel:
    """Report by exception, the queue and the MQTT session of one ``publish[]`` entry."""

    def __init__(
        self,
        cfg: Publish,
        *,
        site: str,
        state_path: str,
        point_inputs: Mapping[str, tuple[str, ...]],
        sources: list[str],
        alarms: list[str],
        clock: Callable[[], float] = time.time,
        where: str = "publish",
    ) -> None:
        self.cfg = cfg
        self.name = cfg.name
        self.clock = clock
        self.scheme, self.host, self.port = broker_address(cfg.mqtt)
        self.password = read_secret(cfg.password_env, cfg.password_file, key=f"{where}.password")
        self.tls = tls_context(cfg, where) if self.scheme == "mqtts" else None
        self._log = get_logger(component="publish", channel=cfg.name)
        self.queue = Queue(queue_path(state_path, cfg.name), bound=cfg.queue_max)
        self.point_inputs = dict(point_inputs)
        self.reporter = Reporter(
            max_silence=cfg.max_silence,
            default=Deadband(cfg.deadband.pressure, cfg.deadband.temperature),
            per_point={
                n: Deadband(
                    d.pressure if d.pressure is not None else cfg.deadband.pressure,
                    d.temperature if d.temperature is not None else cfg.deadband.temperature,
                )
                for n, d in cfg.points.items()
            },
        )
        session = int(self.queue.get_meta("next_session", "0") or 0)
        properties = {"Advisory notice": ADVISORY_NOTICE, "Version": __version__, "Site": site}
        self.node: SparkplugNode | JsonNode
        if cfg.format == "sparkplug-b":
            self.node = SparkplugNode(
                group=cfg.group,
                node=cfg.node or site,
                points=list(point_inputs),
                sources=sources,
                alarms=alarms,
                properties=properties,
                bd_seq=session,
            )
        else:
            self.node = JsonNode(
                prefix=cfg.topic or default_topic(site),
                site=site,
                qos=1 if cfg.qos is None else cfg.qos,
                points=list(point_inputs),
                sources=sources,
                alarms=alarms,
                properties={"notice": ADVISORY_NOTICE, "version": __version__},
                session=session,
            )
        self.client_id = cfg.client_id or re.sub(
            r"[^A-Za-z0-9_-]", "-", f"steam-edge-{site}-{cfg.name}"
        )
        self.latest: dict[tuple[str, str], Record] = {}
        self.connected = False
        self.published = 0  # MQTT messages the broker has
        self.connects = 0
        self.failures = 0  # failed sessions in a row
        self.last_error = ""
        self.queue_ok = True
        self._wake = asyncio.Event()
        self._rebirth = False
        self._host_stamp = -1  # timestamp of the newest primary host STATE seen
        self._stopping = False
        self._task: asyncio.Task[None] | None = None

    # --- the evaluation side (sync, never waits on the broker) -------------------------

    def offer(
        self,
        points: Mapping[str, PointState],
        snapshot: Mapping[str, Sample],
        sources: Mapping[str, Any],
        now: float,
    ) -> None:
        """Queue what report by exception says is due for this pass."""
        records: list[Record] = []
        for name in self.reporter.points(points, now):
            tags = self.point_inputs.get(name, ())
            inputs = {t: snapshot.get(t) for t in tags}
            records.append(point_record(points[name], now, inputs))
        for name in self.reporter.sources(sources, now):
            records.append(source_record(name, sources[name], now))
        self._queue(records, now)

    def offer_events(self, events: list[AlarmEvent]) -> None:
        """Queue journalled alarm events (those with the journal's id)."""
        records = [alarm_record(e) for e in events if e.id is not None]
        self._queue(records, self.clock())

    def _queue(self, records: list[Record], now: float) -> None:
        if not records:
            return
        for r in records:
            self.latest[(r["type"], r["name"])] = r
        before = self.queue.dropped_alarms
        try:
            self.queue.put(records, now)
        except StorageError as exc:
            if self.queue_ok:
                self._log.error("publish_queue_failed", error=str(exc))
            self.queue_ok = False
            return
        self.queue_ok = True
        if self.queue.dropped_alarms > before:
            self._log.error(
                "publish_queue_full",
                dropped_alarm_events=self.queue.dropped_alarms - before,
                bound=self.queue.bound,
            )
        self._wake.set()

    # --- the MQTT side -----------------------------------------------------------------

    def start(self) -> None:
        self._task = asyncio.create_task(self.run(), name=f"publish:{self.name}")

    async def stop(self, timeout: float = 2.0) -> None:
        """Send the death (clean stop), disconnect, close the queue."""
        from edge.service.tasks import stop_task

        task, self._task = self._task, None
        self._stopping = True
        self._wake.set()
        if task is not None:
            # connected: a moment to send the death; otherwise nothing to wait for
            done, _ = await asyncio.wait({task}, timeout=timeout if self.connected else 0.05)
            if not done:
                await stop_task(task, 1.0)
        self.connected = False
        with contextlib.suppress(Exception):
            self.queue.close()

    async def run(self) -> None:
        rand = random.Random()
        while not self._stopping:
            try:
                await self._session()
            except asyncio.CancelledError:
                raise
            except _HostOffline:
                self._log.warning("publish_host_offline", host=self.cfg.primary_host)
            except (aiomqtt.MqttError, OSError, ssl.SSLError, TimeoutError) as exc:
                self.failures += 1
                self.last_error = _describe(exc)
                delay = backoff_delay(
                    self.failures, base=BACKOFF_BASE, cap=self.cfg.backoff_max, rand=rand.random()
                )
                event = "publish_disconnected" if self.connected else "publish_connect_failed"
                self._log.error(
                    event,
                    broker=f"{self.host}:{self.port}",
                    error=self.last_error,
                    retry_in=round(delay, 1),
                    queued=self.queue.size,
                )
                self.connected = False
                await self._sleep(delay)
                continue
            except Exception as exc:  # a bug must not end publishing for good
                self.failures += 1
                self._log.exception("publish_failed", error=f"{type(exc).__name__}: {exc}")
                await self._sleep(min(self.cfg.backoff_max, 5.0))
            self.connected = False

    async def _sleep(self, seconds: float) -> None:
        with contextlib.suppress(TimeoutError):
            async with asyncio.timeout(seconds):
                while not self._stopping:
                    self._wake.clear()
                    await self._wake.wait()

    def _client(self, will: Message) -> aiomqtt.Client:
        # a fresh session every time (MQTT 3.1.1 clean session; MQTT 5 clean start with no
        # session expiry, as Sparkplug 3.0 asks of an Edge Node): the queue is the memory
        v5 = self.cfg.protocol == "5"
        client = aiomqtt.Client(
            self.host,
            self.port,
            username=self.cfg.username,
            password=self.password,
            identifier=self.client_id,
            will=aiomqtt.Will(will.topic, will.payload, will.qos, will.retain),
            clean_session=None if v5 else True,
            clean_start=True if v5 else mqtt_client.MQTT_CLEAN_START_FIRST_ONLY,
            keepalive=max(1, int(self.cfg.keepalive)),
            timeout=self.cfg.timeout,
            tls_context=self.tls,
            protocol=aiomqtt.ProtocolVersion.V5 if v5 else aiomqtt.ProtocolVersion.V311,
        )
        # a batch is BATCH publishes in flight on purpose: no warning line for each of them
        client.pending_calls_threshold = 2 * BATCH + 10
        return client

    async def _session(self) -> None:
        node = self.node
        will = node.connect(ms(self.clock()))
        async with self._client(will) as client:
            node.connected()
            try:
                self.queue.set_meta("next_session", str(node.next_bd_seq))
            except StorageError as exc:
                self._log.error("publish_queue_failed", error=str(exc))
            self.connected = True
            self.connects += 1
            self.failures = 0
            self.last_error = ""
            started = self.clock()
            self._log.info(
                "publish_connected",
                broker=f"{self.host}:{self.port}",
                tls=self.tls is not None,
                format=self.cfg.format,
                queued=self.queue.size,
            )
            host_online = asyncio.Event()
            host_gone = asyncio.Event()
            for topic in node.command_topics:
                await client.subscribe(topic, qos=0)
            state_topic = None
            if self.cfg.primary_host:
                state_topic = f"{NAMESPACE}/STATE/{self.cfg.primary_host}"
                await client.subscribe(state_topic, qos=1)
            else:
                host_online.set()
            listener = asyncio.create_task(
                self._listen(client, state_topic, host_online, host_gone), name="publish-listen"
            )
            try:
                await self._wait_host(host_online, host_gone, listener)
                await self._send(client, node.birth(self.latest, ms(self.clock())))
                session = node.bd_seq if isinstance(node, SparkplugNode) else node.session
                self._log.info("publish_birth", session=session)
                while not self._stopping:
                    if host_gone.is_set():  # say goodbye before leaving, as on a stop
                        await self._send(client, [node.death(ms(self.clock()))])
                        raise _HostOffline
                    if listener.done():
                        listener.result()  # the connection ended: raises its error
                        raise aiomqtt.MqttError("the connection ended")
                    if self._rebirth:
                        self._rebirth = False
                        await self._send(client, node.birth(self.latest, ms(self.clock())))
                        self._log.info("publish_rebirth")
                    self._wake.clear()  # before looking: a record queued after this wakes us
                    batch = self.queue.peek(BATCH)
                    if not batch:
                        with contextlib.suppress(TimeoutError):
                            async with asyncio.timeout(1.0):
                                await self._wake.wait()
                        continue
                    await self._send(client, self._messages(batch, started))
                    self.queue.remove(batch[-1].id)
                await self._send(client, [node.death(ms(self.clock()))])  # a clean stop
            finally:
                listener.cancel()
                with contextlib.suppress(BaseException):
                    await listener

    def _messages(self, batch: list[Queued], started: float) -> list[Message]:
        """The MQTT messages for queued records; those queued before this connection
        began waited through an outage (``stored`` / ``is_historical``)."""
        node, now_ms = self.node, ms(self.clock())
        out: list[Message] = []
        if isinstance(node, JsonNode):
            for q in batch:
                out += node.data_text(q.kind, q.name, q.body, now_ms, historical=q.queued < started)
        else:
            for q in batch:
                out += node.data(q.record, now_ms, historical=q.queued < started)
        return out

    async def _wait_host(
        self, online: asyncio.Event, gone: asyncio.Event, listener: asyncio.Task[None]
    ) -> None:
        if online.is_set():
            return
        self._log.info("publish_waiting_for_host", host=self.cfg.primary_host)
        while not online.is_set():
            if self._stopping:
                return
            if listener.done():
                listener.result()
                raise aiomqtt.MqttError("the connection ended")
            with contextlib.suppress(TimeoutError):
                async with asyncio.timeout(0.5):
                    await online.wait()
        gone.clear()

    async def _listen(
        self,
        client: aiomqtt.Client,
        state_topic: str | None,
        online: asyncio.Event,
        gone: asyncio.Event,
    ) -> None:
        """Commands and the primary host's STATE, until the connection ends. A STATE older
        than the newest one seen (on any connection) is ignored."""
        async for message in client.messages:
            topic = str(message.topic)
            payload = message.payload if isinstance(message.payload, bytes) else b""
            if state_topic is not None and topic == state_topic:
                try:
                    state = json.loads(payload)
                    up, stamp = bool(state["online"]), int(state.get("timestamp", 0))
                except (ValueError, KeyError, TypeError):
                    self._log.warning("publish_bad_state", topic=topic)
                    continue
                if stamp < self._host_stamp:
                    continue  # an older STATE than the one in force
                self._host_stamp = stamp
                if up:
                    online.set()
                else:
                    online.clear()
                    if self.node.born:
                        gone.set()
                        self._wake.set()
                continue
            verdict = self.node.command(topic, payload)
            if verdict == "rebirth":
                self._rebirth = True
                self._wake.set()
            elif verdict == "refused":
                self._log.warning("publish_command_refused", topic=topic, reason="advisory only")

    async def _send(self, client: aiomqtt.Client, messages: list[Message]) -> None:
        """Publish in order; return once the broker has every one of them."""
        if not messages:
            return
        timeout = self.cfg.timeout
        await asyncio.gather(
            *(
                client.publish(m.topic, m.payload, qos=m.qos, retain=m.retain, timeout=timeout)
                for m in messages
            )
        )
        if any(m.qos == 0 for m in messages):
            # QoS 0 has no acknowledgement: a round trip after the batch proves the broker
            # read it (it handles a connection's packets in order)
            await client.unsubscribe(f"{NAMESPACE}/steam-edge-confirm", timeout=timeout)
        self.published += len(messages)
