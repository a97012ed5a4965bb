"""OPC UA source (asyncua): tags by NodeId, read through one subscription per source or,
with ``mode: poll``, by batched reads each interval.

Life of a connection::

    connect (security, user) ─> monitored items ─> serve ──lost──> all tags bad/comm_loss
         ^                                                                   │
         └──────────── capped exponential backoff, a fresh session ──────────┘

While a session is up, datachange notifications are only enqueued by the library's
callback; one consumer task turns them into Samples and emits them at once, and every
interval each tag's latest value is emitted again (the live subscription vouches it is
current). A keep-alive read every ``watchdog`` seconds, answered within ``watchdog``
seconds, catches a server that keeps its socket open but stopped answering. While the
link is down, every tag is emitted bad/``comm_loss`` each interval with its last good
value as context. ``run`` never raises on plant faults: it counts them in ``health`` by
kind (refused, connection, timeout, security, config, status, subscription, protocol).
``health.observe_read`` records the batched read in poll mode and the keep-alive round trip
in subscribe mode.
"""

from __future__ import annotations

import asyncio
import contextlib
import math
import random
import time
from collections.abc import Awaitable, Callable
from typing import Any

from asyncua import Client, ua

from edge import config as cfg
from edge.backoff import backoff_delay
from edge.errors import SourceError, SourceTimeout
from edge.logs import get_logger
from edge.model import COMM_LOSS, CONFIG, Level, Sample, bad
from edge.sources.base import Emit, SourceHealth
from edge.sources.cancel import raise_if_cancelling
from edge.sources.opcua_client import close_client, open_client, translate
from edge.sources.opcua_values import TagChannel, status_name

__all__ = ["OpcUaSource"]

FIRST_RETRY = 0.5  # seconds before the first reconnect attempt; doubles up to backoff_max
READ_BATCH = 250  # nodes per Read request in poll mode (servers cap NodesToRead)
_STATUS = 0  # client handle used on our queue for subscription status changes
_SERVER_STATE = ua.NodeId(ua.ObjectIds.Server_ServerStatus_State)


class _Enqueue:
    """Subscription handler: puts what arrives on a queue and does nothing else."""

    __slots__ = ("_put",)

    def __init__(self, queue: asyncio.Queue[tuple[int, Any]]) -> None:
        self._put = queue.put_nowait

    def datachange_notification(self, node: Any, val: Any, data: Any) -> None:
        item = data.monitored_item
        self._put((item.ClientHandle, item.Value))

    def status_change_notification(self, status: Any) -> None:
        self._put((_STATUS, status))


class OpcUaSource:
    """One ``protocol: opcua`` entry of the config. Implements ``edge.sources.base.Source``."""

    def __init__(self, config: cfg.OpcUaSource) -> None:
        self.config = config
        self.name = config.name
        self.health = SourceHealth()
        self._channels = [TagChannel.build(tag) for tag in config.tags]
        self._up = False
        self._down_reason = COMM_LOSS
        self._last_error = ""

    def _log(self) -> Any:
        return get_logger(component="opcua", source=self.name)

    async def run(self, emit: Emit) -> None:
        """Read until cancelled; reconnect with capped backoff; never raise on plant faults.
        Logs ``security_warnings`` for this source first (policy None off this machine)."""
        for warning in cfg.security_warnings(self.config):
            self._log().warning("source_security", warning=warning)
        for ch in self._channels:
            if ch.node is None:
                self._log().error(
                    "bad_node_id",
                    tag=ch.tag.name,
                    node=ch.tag.node,
                    detail="not a NodeId string such as ns=2;s=Boiler.Pressure",
                )
        ticker = asyncio.create_task(self._tick(emit))
        try:
            await self._connect_loop(emit)
        finally:
            self._up = self.health.up = False
            ticker.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await ticker

    async def _connect_loop(self, emit: Emit) -> None:
        src = self.config
        failures = 0
        while True:
            lost: asyncio.Future[Exception] = asyncio.get_running_loop().create_future()
            try:
                client = await open_client(src, on_lost=_resolver(lost))
            except SourceError as exc:
                self._failed(exc)
            else:
                started = time.monotonic()
                try:
                    await self._serve(client, emit, lost)
                except asyncio.CancelledError:
                    await close_client(client, min(src.timeout, 1.0))
                    raise
                except Exception as exc:
                    if not isinstance(exc, SourceError):
                        self._log().exception("internal_error")
                    self._failed(translate(exc, self.name, src.timeout))
                self._go_down(emit)
                await close_client(client, min(src.timeout, 1.0))
                if time.monotonic() - started > src.backoff_max:
                    failures = 0  # a session that lasted: start the backoff afresh
            raise_if_cancelling()  # asyncio.wait_for may have swallowed it mid-connect
            failures += 1
            cap = src.backoff_max
            await asyncio.sleep(
                backoff_delay(failures, base=FIRST_RETRY, cap=cap, rand=random.random())
            )

    def _failed(self, exc: SourceError) -> None:
        self.health.count_error(exc.kind, str(exc))
        self._down_reason = CONFIG if exc.kind == "config" else COMM_LOSS
        message = str(exc)
        log = self._log()
        if message != self._last_error or self._up:
            log.warning("source_down", protocol="opcua", kind=exc.kind, detail=message)
        else:
            log.debug("source_down", protocol="opcua", kind=exc.kind, detail=message)
        self._last_error = message
        self._up = self.health.up = False

    def _go_down(self, emit: Emit) -> None:
        self._up = self.health.up = False
        now = time.time()
        self._deliver(emit, [ch.lost(self._down_reason, now) for ch in self._channels])

    def _went_up(self, client: Client) -> None:
        self._up = self.health.up = True
        self._last_error = ""
        self._log().info(
            "source_up",
            protocol="opcua",
            endpoint=self.config.endpoint,
            mode=self.config.mode,
            policy=self.config.security.policy,
            security_mode=self.config.security.mode,
        )

    async def _tick(self, emit: Emit) -> None:
        """Every interval: every tag bad while down; in subscribe mode, latest values again."""
        loop = asyncio.get_running_loop()
        interval = self.config.interval
        next_t = loop.time() + interval
        while True:
            await asyncio.sleep(max(0.0, next_t - loop.time()))
            next_t = max(next_t + interval, loop.time())
            now = time.time()
            if not self._up:
                self._deliver(emit, [ch.lost(self._down_reason, now) for ch in self._channels])
            elif self.config.mode == "subscribe":
                samples = [s for ch in self._channels if (s := ch.refreshed(now)) is not None]
                if samples:
                    self._deliver(emit, samples)

    async def _serve(self, client: Client, emit: Emit, lost: asyncio.Future[Exception]) -> None:
        """Run one session until something ends it; always ends by raising."""
        for ch in self._channels:
            ch.latest = None
            ch.refused = None
        if self.config.mode == "poll":
            work = [self._poll(client, emit)]
        else:
            queue: asyncio.Queue[tuple[int, Any]] = asyncio.Queue()
            sub = await self._subscribe(client, queue)
            work = [self._consume(queue, emit), self._watchdog(client, sub)]
        self._went_up(client)
        tasks = [asyncio.ensure_future(w) for w in work]
        try:
            await asyncio.wait([*tasks, lost], return_when=asyncio.FIRST_COMPLETED)
        finally:
            for t in tasks:
                t.cancel()
            await asyncio.gather(*tasks, return_exceptions=True)
        for t in tasks:
            if t.done() and not t.cancelled() and t.exception() is not None:
                raise t.exception()  # type: ignore[misc]
        if lost.done():
            raise (
                translate(lost.result(), self.name)
                if not isinstance(lost.result(), SourceError)
                else lost.result()
            )
        raise SourceError("session ended", source=self.name, kind="connection")

    async def _subscribe(self, client: Client, queue: asyncio.Queue[tuple[int, Any]]) -> Any:
        src = self.config
        interval_ms = src.interval * 1000.0
        keepalive = max(1, math.ceil(src.watchdog / src.interval))
        params = ua.CreateSubscriptionParameters(
            RequestedPublishingInterval=interval_ms,
            RequestedLifetimeCount=max(3 * keepalive, 30),
            RequestedMaxKeepAliveCount=keepalive,
            MaxNotificationsPerPublish=0,
            PublishingEnabled=True,
            Priority=0,
        )
        sub = await asyncio.wait_for(
            client.create_subscription(params, _Enqueue(queue)), 2 * src.timeout
        )
        wanted = [(i, ch) for i, ch in enumerate(self._channels, start=1) if ch.node is not None]
        requests = [
            ua.MonitoredItemCreateRequest(
                ItemToMonitor=ua.ReadValueId(NodeId=ch.node, AttributeId=ua.AttributeIds.Value),
                MonitoringMode=ua.MonitoringMode.Reporting,
                RequestedParameters=ua.MonitoringParameters(
                    ClientHandle=handle,
                    SamplingInterval=interval_ms,
                    QueueSize=1,
                    DiscardOldest=True,
                ),
            )
            for handle, ch in wanted
        ]
        results: list[Any] = []
        for start in range(0, len(requests), READ_BATCH):
            chunk = requests[start : start + READ_BATCH]
            results += await asyncio.wait_for(sub.create_monitored_items(chunk), 2 * src.timeout)
        for (_, ch), result in zip(wanted, results, strict=True):
            if isinstance(result, ua.StatusCode):
                ch.refused = bad(status_name(result.value))
                self._explain(ch, f"server refused node {ch.tag.node}: {status_name(result.value)}")
        return sub

    async def _consume(self, queue: asyncio.Queue[tuple[int, Any]], emit: Emit) -> None:
        """Turn queued notifications into Samples, emitting each burst as one batch."""
        channels = self._channels
        while True:
            batch = [await queue.get()]
            while not queue.empty():
                batch.append(queue.get_nowait())
            now = time.time()
            samples: list[Sample] = []
            for handle, payload in batch:
                if handle == _STATUS:
                    code = getattr(getattr(payload, "Status", None), "value", 0) or 0
                    raise SourceError(
                        f"subscription ended ({status_name(code)})",
                        source=self.name,
                        kind="subscription",
                    )
                if 0 < handle <= len(channels):
                    samples.append(self._convert(channels[handle - 1], payload, now))
            if samples:
                self._deliver(emit, samples)

    async def _watchdog(self, client: Client, sub: Any) -> None:
        """Keep-alive: a read answered within ``watchdog`` s, and publish responses flowing."""
        src = self.config
        period = src.watchdog
        keepalive_s = max(1, math.ceil(period / src.interval)) * src.interval
        silence = 2 * keepalive_s + src.timeout + src.interval
        started = time.monotonic()
        state = client.get_node(_SERVER_STATE)
        while True:
            await asyncio.sleep(period)
            t0 = time.monotonic()
            try:
                await asyncio.wait_for(state.read_data_value(raise_on_bad_status=False), period)
            except TimeoutError as exc:
                raise SourceTimeout(
                    f"server stopped answering (keep-alive read over {period:g} s)",
                    source=self.name,
                ) from exc
            self.health.observe_read(time.monotonic() - t0)
            last = sub.last_publish_at or started
            if time.monotonic() - last > silence:
                raise SourceError(
                    f"subscription silent for over {silence:g} s",
                    source=self.name,
                    kind="subscription",
                )

    async def _poll(self, client: Client, emit: Emit) -> None:
        """``mode: poll``: one batched Read of every node per interval."""
        src = self.config
        wanted = [ch for ch in self._channels if ch.node is not None]
        fixed = [ch for ch in self._channels if ch.node is None]
        ids = [ua.ReadValueId(NodeId=ch.node, AttributeId=ua.AttributeIds.Value) for ch in wanted]
        loop = asyncio.get_running_loop()
        next_t = loop.time()
        while True:
            t0 = time.monotonic()
            values: list[Any] = []
            for start in range(0, len(ids), READ_BATCH):
                params = ua.ReadParameters(
                    MaxAge=0,
                    TimestampsToReturn=ua.TimestampsToReturn.Both,
                    NodesToRead=ids[start : start + READ_BATCH],
                )
                values += await asyncio.wait_for(client.uaclient.read(params), src.timeout)
            self.health.observe_read(time.monotonic() - t0)
            now = time.time()
            samples = [self._convert(ch, dv, now) for ch, dv in zip(wanted, values, strict=True)]
            samples += [ch.lost(CONFIG, now) for ch in fixed]
            self._deliver(emit, samples)
            next_t = max(next_t + src.interval, loop.time())
            await asyncio.sleep(next_t - loop.time())

    def _convert(self, ch: TagChannel, dv: Any, now: float) -> Sample:
        sample, detail = ch.from_data_value(dv, now)
        if detail is not None:
            self._explain(ch, detail)
        return sample

    def _deliver(self, emit: Emit, samples: list[Sample]) -> None:
        """Hand samples on. A failing consumer is logged, never taken for a plant fault."""
        try:
            emit(samples)
        except Exception:
            self._log().exception("emit_failed")
            return
        if not self.health.delivered and any(s.quality.level is Level.GOOD for s in samples):
            self.health.delivered = True

    def _explain(self, ch: TagChannel, detail: str) -> None:
        """Log a tag's standing problem once per distinct problem."""
        if detail not in ch.explained:
            ch.explained.add(detail)
            self._log().warning("tag_problem", tag=ch.tag.name, detail=detail)


def _resolver(fut: asyncio.Future[Exception]) -> Callable[[Exception], Awaitable[None]]:
    """``connection_lost_callback`` for one session: resolves that session's future only."""

    async def on_lost(exc: Exception) -> None:
        if not fut.done():
            fut.set_result(exc)

    return on_lost
