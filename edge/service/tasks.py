"""Owned tasks of the service: one supervised task per source, one evaluation loop.

A source's ``run`` never raises on plant faults; if it raises anyway (a bug, a library
surprise), the supervisor counts it as error kind ``crash``, marks the source down, logs
it and starts it again after a capped backoff, so a fault in one source never stops another.

The evaluation loop coalesces: it runs after a batch of samples arrived (at most once per
``min_gap``), and when no pass ran for a ``tick`` (timers and staleness); it pings the
systemd watchdog from inside the loop, so a stuck loop is noticed and restarted.
"""

from __future__ import annotations

import asyncio
import contextlib
import random
import time
from collections.abc import Callable
from typing import Any

from edge.backoff import backoff_delay
from edge.logs import get_logger
from edge.sources import build_source
from edge.sources.base import Emit, Source

RESTART_BASE = 1.0  # s before restarting a source that raised (doubling, jittered)

__all__ = ["EvaluationLoop", "SourceSet", "SourceTask", "finish", "stop_task"]


async def stop_task(task: asyncio.Task[Any], timeout: float) -> bool:
    """Cancel ``task`` and wait at most ``timeout`` s for it to end; True if it ended.

    Never ``wait_for(task)``: on Python 3.11 a library's own ``wait_for`` swallows a
    cancellation that lands in the loop iteration where its result arrives (pymodbus waits
    for every connect and answer that way; on loopback they arrive at once), the task runs
    on, and ``wait_for`` then waits for it forever. Here the cancellation is repeated at a
    growing pace (50 ms, 100 ms, ... never in step with a poll interval) until the task
    ends; one that outlives ``timeout`` is left behind instead of holding up shutdown."""
    loop = asyncio.get_running_loop()
    deadline = loop.time() + timeout
    pause = 0.05
    while not task.done():
        left = deadline - loop.time()
        if left <= 0:
            return False
        task.cancel()
        await asyncio.wait({task}, timeout=min(pause, left))
        pause = min(pause * 2, 0.5)
    if not task.cancelled():
        task.exception()  # retrieved: a crash on the way out was already logged or moot
    return True


async def finish(awaitable: Any, timeout: float) -> bool:
    """Run a clean-up coroutine for at most ``timeout`` s (see ``stop_task``); True if it
    completed. Its exceptions are swallowed: a clean-up must not stop the next one."""
    task = asyncio.ensure_future(awaitable)
    done, _ = await asyncio.wait({task}, timeout=timeout)
    if not done:
        await stop_task(task, 1.0)
        return False
    if not task.cancelled():
        task.exception()
    return True


class SourceTask:
    """Runs one source until stopped, restarting it with backoff if it ever raises."""

    def __init__(self, source: Source, emit: Emit, config: Any, *, backoff_max: float = 30.0):
        self.source = source
        self.config = config  # the sources[] entry it was built from (compared on reload)
        self._emit = emit
        self._backoff_max = backoff_max
        self._task: asyncio.Task[None] | None = None
        self._log = get_logger(component="source", source=source.name)

    @property
    def name(self) -> str:
        return self.source.name

    def start(self) -> None:
        self._task = asyncio.create_task(self._supervise(), name=f"source:{self.name}")

    async def _supervise(self) -> None:
        failures = 0
        while True:
            started = time.monotonic()
            try:
                await self.source.run(self._emit)
                self._log.warning("source_returned")
            except asyncio.CancelledError:
                raise
            except Exception as exc:
                self.source.health.up = False
                self.source.health.count_error("crash", f"{type(exc).__name__}: {exc}")
                self._log.error("source_crashed", error=f"{type(exc).__name__}: {exc}")
            if time.monotonic() - started > self._backoff_max:
                failures = 0
            failures += 1
            delay = backoff_delay(
                failures, base=RESTART_BASE, cap=self._backoff_max, rand=random.random()
            )
            await asyncio.sleep(delay)

    async def stop(self, timeout: float = 2.0) -> None:
        """Cancel the source and close it, in at most about twice ``timeout``."""
        task, self._task = self._task, None
        if task is None:
            return
        if not await stop_task(task, timeout):
            self._log.warning("source_stop_timeout", waited=timeout)
        close = getattr(self.source, "close", None) or getattr(self.source, "aclose", None)
        if close is not None:
            with contextlib.suppress(Exception):
                result = close()
                if asyncio.iscoroutine(result) and not await finish(result, timeout):
                    self._log.warning("source_close_timeout", waited=timeout)


class SourceSet:
    """The running sources, by name; ``apply`` swaps them for a new config's list."""

    def __init__(self, emit: Emit) -> None:
        self._emit = emit
        self.tasks: dict[str, SourceTask] = {}

    @property
    def sources(self) -> dict[str, Source]:
        return {name: t.source for name, t in self.tasks.items()}

    def start(self, cfg: Any) -> None:
        task = SourceTask(build_source(cfg), self._emit, cfg)
        self.tasks[cfg.name] = task
        task.start()

    async def apply(self, configs: list[Any]) -> dict[str, list[str]]:
        """Keep unchanged sources running, stop removed or changed ones, start new ones."""
        wanted = {c.name: c for c in configs}
        stop = [n for n, t in self.tasks.items() if wanted.get(n) != t.config]
        await asyncio.gather(*(self.tasks.pop(n).stop() for n in stop))
        started = [c.name for c in configs if c.name not in self.tasks]
        for name in started:
            self.start(wanted[name])
        return {
            "sources_stopped": sorted(set(stop) - set(started)),
            "sources_started": sorted(set(started) - set(stop)),
            "sources_restarted": sorted(set(stop) & set(started)),
        }

    async def stop_all(self) -> None:
        await asyncio.gather(*(t.stop() for t in self.tasks.values()))
        self.tasks.clear()


class EvaluationLoop:
    """Calls ``evaluate()`` after new samples (coalesced) and on every tick."""

    def __init__(
        self,
        evaluate: Callable[[], None],
        *,
        tick: float = 1.0,
        min_gap: float = 0.05,
        watchdog: Callable[[], object] | None = None,
        watchdog_interval: float | None = None,
    ) -> None:
        self._evaluate = evaluate
        self.tick = min(tick, watchdog_interval / 4) if watchdog_interval else tick
        self.min_gap = min_gap
        self._watchdog = watchdog
        self._watchdog_interval = watchdog_interval
        self._dirty = asyncio.Event()
        self._task: asyncio.Task[None] | None = None
        self._last_ping = float("-inf")
        self.last_run = 0.0  # monotonic time of the last pass
        self._log = get_logger(component="evaluation")

    def poke(self) -> None:
        """New samples arrived: evaluate soon."""
        self._dirty.set()

    def start(self) -> None:
        self._task = asyncio.create_task(self._loop(), name="evaluation")

    @property
    def running(self) -> bool:
        return self._task is not None and not self._task.done()

    async def _loop(self) -> None:
        while True:
            # the tick counts from the last pass (plus a little grace), so a source that
            # delivers every second gets one pass per batch, not a batch pass and a tick
            due = self.last_run + self.tick * 1.1 - time.monotonic()
            with contextlib.suppress(TimeoutError):
                async with asyncio.timeout(max(0.0, due)):
                    await self._dirty.wait()
            wait = self.last_run + self.min_gap - time.monotonic()
            if wait > 0:  # coalesce a burst of batches into one pass
                await asyncio.sleep(wait)
            self._dirty.clear()
            self.run_once()

    def run_once(self) -> None:
        self.last_run = time.monotonic()
        try:
            self._evaluate()
        except Exception as exc:  # a bug must not kill the loop (nor hide: it is logged)
            self._log.exception("evaluation_failed", error=f"{type(exc).__name__}: {exc}")
        if self._watchdog is not None and self._watchdog_interval is not None:
            now = time.monotonic()
            if now - self._last_ping >= self._watchdog_interval * 0.9:
                self._last_ping = now
                self._watchdog()

    async def stop(self) -> None:
        task, self._task = self._task, None
        if task is not None:
            await stop_task(task, 2.0)
