"""One delivery worker per channel: takes due items from the outbox, sends a burst as one
message, marks it delivered; on failure waits (capped exponential backoff with jitter)
and tries again. Nothing is ever dropped: an item leaves the queue only when delivered.

Grouping: the first undelivered item opens a window of ``group_window`` seconds; every
item queued inside it goes in the same message (up to ``batch_limit`` events), so a flood
of fifty events is one message, not fifty. Retries send everything due at once.

Channels that must keep something alive at the receiver (Alertmanager) are refreshed every
``channel.refresh_interval`` seconds while the queue is empty; after a restart the worker
first restores what the receiver was last told from the outbox.
"""

from __future__ import annotations

import asyncio
import random
import time
from collections.abc import Awaitable, Callable

from edge.backoff import backoff_delay
from edge.errors import DeliveryFailed, NotifyError, StorageError
from edge.logs import get_logger
from edge.notify.base import Channel
from edge.notify.outbox import Outbox

__all__ = ["DeliveryWorker"]


class DeliveryWorker:
    """Delivers one channel's queue until cancelled (``run``); ``run_once`` is one step."""

    def __init__(
        self,
        outbox: Outbox,
        channel: Channel,
        *,
        clock: Callable[[], float] = time.time,
        sleep: Callable[[float], Awaitable[object]] = asyncio.sleep,
        rand: Callable[[], float] = random.random,
        batch_limit: int = 100,
        idle: float = 1.0,
        base_delay: float = 1.0,
    ) -> None:
        self.outbox = outbox
        self.channel = channel
        self.name = channel.name
        self._clock = clock
        self._sleep = sleep
        self._rand = rand
        self.batch_limit = batch_limit
        self.idle = idle
        self.base_delay = base_delay
        self.failures = 0  # consecutive failed attempts (resets on success)
        self.failed_attempts = 0  # all failed attempts since start
        self.delivered_messages = 0
        self.delivered_events = 0
        self._blocked_until = 0.0
        self._last_refresh = float("-inf")
        self._wake = asyncio.Event()
        self._log = get_logger(component="notify", channel=channel.name)

    def _queued(self, channel: str) -> None:
        if channel == self.name:
            self._wake.set()

    def wake(self) -> None:
        """Look at the queue now (new items are noticed by themselves)."""
        self._wake.set()

    def _backoff(self, retry_after: float | None = None) -> float:
        cap = self.channel.config.backoff_max
        delay = backoff_delay(self.failures, base=self.base_delay, cap=cap, rand=self._rand())
        if retry_after is not None:
            delay = min(max(delay, retry_after), cap)
        return delay

    async def run_once(self) -> float:
        """One step: deliver what is due (or refresh); return seconds until the next step."""
        now = self._clock()
        if now < self._blocked_until:
            return self._blocked_until - now
        items = self.outbox.due(self.name, now, self.batch_limit)
        if not items:
            return await self._idle(now)
        window_end = min(i.created for i in items) + self.channel.config.group_window
        fresh = all(i.attempts == 0 for i in items)
        if fresh and now < window_end and len(items) < self.batch_limit:
            return window_end - now  # gather the rest of the burst
        ids = [i.id for i in items]
        try:
            await self.channel.deliver(items)
        except Exception as exc:
            self.failures += 1
            self.failed_attempts += 1
            retry_after = exc.retry_after if isinstance(exc, DeliveryFailed) else None
            delay = self._backoff(retry_after)
            self._blocked_until = now + delay
            if isinstance(exc, NotifyError):
                self._log.warning(
                    "notify_failed",
                    error=str(exc),
                    status=getattr(exc, "status", 0),
                    events=len(items),
                    attempt=self.failures,
                    retry_in=round(delay, 3),
                )
            else:  # a bug, not the receiver: keep the items and say so loudly
                self._log.exception("notify_crashed", events=len(items), retry_in=round(delay, 3))
            self.outbox.mark_failed(ids, now + delay, error=str(exc))
            return delay
        self.outbox.mark_delivered(ids)
        self.failures = 0
        self.delivered_messages += 1
        self.delivered_events += len(items)
        self._log.info(
            "notify_delivered",
            events=len(items),
            keys=[i.key for i in items[:5]],
            latency=round(self._clock() - min(i.created for i in items), 3),
        )
        return 0.0

    async def _idle(self, now: float) -> float:
        interval = self.channel.refresh_interval
        if (
            interval
            and now - self._last_refresh >= interval
            and self.outbox.pending(self.name) == 0
        ):
            self._last_refresh = now
            try:
                await self.channel.refresh()
            except NotifyError as exc:
                self._log.warning("notify_refresh_failed", error=str(exc))
            except Exception:
                self._log.exception("notify_refresh_crashed")
        delay = self.idle
        next_try = self.outbox.next_try(self.name)
        if next_try is not None:
            delay = min(delay, next_try - now)
        if interval:
            delay = min(delay, self._last_refresh + interval - now)
        return max(delay, 0.0)

    async def _wait(self, delay: float) -> None:
        if self._wake.is_set() or delay <= 0:
            await self._sleep(0)
            return
        sleeper = asyncio.ensure_future(self._sleep(delay))
        waker = asyncio.ensure_future(self._wake.wait())
        try:
            await asyncio.wait({sleeper, waker}, return_when=asyncio.FIRST_COMPLETED)
        finally:
            for task in (sleeper, waker):
                task.cancel()
            await asyncio.gather(sleeper, waker, return_exceptions=True)

    async def run(self) -> None:
        """Deliver until cancelled; closes the channel at the end."""
        self.outbox.add_listener(self._queued)
        try:
            try:
                delivered = self.outbox.latest_delivered(self.name)
                self.channel.restore(delivered, site=self.outbox.site)
            except StorageError as exc:
                self._log.error("notify_restore_failed", error=str(exc))
            self._log.info("notify_worker_started", pending=self._pending())
            while True:
                self._wake.clear()
                try:
                    delay = await self.run_once()
                except StorageError as exc:
                    self.failures += 1
                    delay = self._backoff()
                    self._log.error("notify_storage_failed", error=str(exc), retry_in=delay)
                await self._wait(delay)
        finally:
            self.outbox.remove_listener(self._queued)
            await self.channel.aclose()

    def _pending(self) -> int | None:
        try:
            return self.outbox.pending(self.name)
        except StorageError:
            return None
