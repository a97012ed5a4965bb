"""The service's owned tasks: a source that crashes is restarted and never stops another;
the evaluation loop runs after new samples (coalesced) and on its tick. Sources here are
small in-memory implementations of the Source port, not protocol stand-ins."""

from __future__ import annotations

import asyncio
import itertools
import time

import pytest

from edge.model import GOOD, Sample
from edge.service.tasks import EvaluationLoop, SourceTask, finish, stop_task
from edge.sources.base import SourceHealth
from tests.support import until

pytestmark = pytest.mark.asyncio


class Crashing:
    """Raises on its first ``crashes`` runs, then emits one sample every 20 ms."""

    def __init__(self, name: str, crashes: int) -> None:
        self.name = name
        self.health = SourceHealth()
        self.crashes = crashes
        self.runs = 0

    async def run(self, emit) -> None:
        self.runs += 1
        if self.runs <= self.crashes:
            raise RuntimeError(f"bug number {self.runs}")
        self.health.up = True
        while True:
            emit([Sample(self.name, 1.0, GOOD, time.time(), time.time())])
            await asyncio.sleep(0.02)


async def test_a_crashing_source_is_counted_and_restarted():
    """A source whose run raises is marked down, counted as 'crash' and run again."""
    source = Crashing("boiler-plc", crashes=2)
    got: list[Sample] = []
    task = SourceTask(source, got.extend, config=None, backoff_max=0.02)
    task.start()
    try:
        await until(lambda: got)
    finally:
        await task.stop()
    assert source.runs == 3
    assert source.health.errors == {"crash": 2}
    assert source.health.last_error == "RuntimeError: bug number 2"


async def test_a_crashing_source_does_not_stop_another():
    """While one source crashes again and again, the other keeps delivering."""
    bad, good = Crashing("annex-plc", crashes=10**6), Crashing("boiler-plc", crashes=0)
    got: list[Sample] = []
    tasks = [SourceTask(s, got.extend, config=None, backoff_max=0.01) for s in (bad, good)]
    for t in tasks:
        t.start()
    try:
        await until(lambda: bad.runs > 5 and len(got) > 5)
    finally:
        for t in tasks:
            await t.stop()
    assert {s.tag for s in got} == {"boiler-plc"}
    assert good.health.up and not bad.health.up


async def test_stop_cancels_a_running_source():
    """stop() ends the source's task within its timeout."""
    source = Crashing("boiler-plc", crashes=0)
    task = SourceTask(source, lambda _s: None, config=None)
    task.start()
    await until(lambda: source.health.up)
    t0 = time.monotonic()
    await task.stop(timeout=1.0)
    assert time.monotonic() - t0 < 1.0
    assert task._task is None


class Stubborn:
    """Shrugs off the first ``swallow`` cancellations, as a library's Python 3.11
    ``wait_for`` does when its answer lands at the moment of the cancel."""

    def __init__(self, swallow: int) -> None:
        self.name = "boiler-plc"
        self.health = SourceHealth()
        self.swallow = swallow
        self.cancels = 0

    async def run(self, emit) -> None:
        self.health.up = True
        while True:
            try:
                await asyncio.sleep(0.01)
            except asyncio.CancelledError:
                self.cancels += 1
                if self.cancels > self.swallow:
                    raise


async def test_stop_gets_past_a_swallowed_cancellation():
    """A source that swallows one cancellation still stops, on the second one."""
    source = Stubborn(swallow=1)
    task = SourceTask(source, lambda _s: None, config=None)
    task.start()
    await until(lambda: source.health.up)
    t0 = time.monotonic()
    await task.stop(timeout=0.4)
    assert time.monotonic() - t0 < 0.5
    assert source.cancels == 2


async def test_stop_is_bounded_even_when_a_source_never_ends():
    """A source that ignores every cancellation is left behind; stop() still returns."""
    source = Stubborn(swallow=10**6)
    task = SourceTask(source, lambda _s: None, config=None)
    task.start()
    await until(lambda: source.health.up)
    running = task._task
    t0 = time.monotonic()
    await task.stop(timeout=0.2)
    assert time.monotonic() - t0 < 0.5
    assert not running.done()
    source.swallow = 0  # let it go, so the test leaves nothing behind
    assert await stop_task(running, 1.0)


async def test_finish_bounds_a_clean_up_that_hangs():
    """finish() gives a clean-up its time and no more, and says whether it completed."""
    assert await finish(asyncio.sleep(0.01), 1.0) is True
    t0 = time.monotonic()
    assert await finish(asyncio.sleep(30), 0.1) is False
    assert time.monotonic() - t0 < 1.0


async def test_evaluation_runs_on_its_tick_without_samples():
    """With no samples arriving, a pass still runs about once per tick (timers, staleness)."""
    passes: list[float] = []
    loop = EvaluationLoop(lambda: passes.append(time.monotonic()), tick=0.05)
    loop.start()
    try:
        await until(lambda: len(passes) >= 5)
    finally:
        await loop.stop()
    gaps = [b - a for a, b in itertools.pairwise(passes)]
    assert min(gaps) >= 0.05  # the tick counts from the last pass


async def test_new_samples_are_evaluated_soon_and_bursts_coalesce():
    """A poke gets a pass well before the tick; a burst of pokes gets one pass."""
    passes: list[float] = []
    loop = EvaluationLoop(lambda: passes.append(time.monotonic()), tick=10.0, min_gap=0.05)
    loop.run_once()  # as the monitor does at start
    loop.start()
    try:
        await asyncio.sleep(0.1)
        assert len(passes) == 1
        for _ in range(20):  # twenty batches in a row
            loop.poke()
        t0 = time.monotonic()
        await until(lambda: len(passes) == 2, timeout=2.0)
        assert passes[1] - t0 < 1.0  # not the 10 s tick
        await asyncio.sleep(0.2)
        assert len(passes) == 2  # one pass for the whole burst
    finally:
        await loop.stop()


async def test_a_failing_pass_does_not_end_the_loop():
    """An exception inside a pass is logged; the loop keeps running."""
    calls: list[int] = []

    def evaluate() -> None:
        calls.append(1)
        if len(calls) == 1:
            raise ValueError("a bug")

    loop = EvaluationLoop(evaluate, tick=0.02)
    loop.start()
    try:
        await until(lambda: len(calls) >= 3)
        assert loop.running
    finally:
        await loop.stop()
