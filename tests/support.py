"""Helpers every test module shares: stopping a task within a bound, polling a condition.

Every wait here has a bound, so a test that goes wrong fails with a message in seconds
instead of hanging the suite (the per-test timeout in pyproject.toml is the last resort).
"""

from __future__ import annotations

import asyncio
from collections.abc import Callable
from typing import Any

__all__ = ["FakeClock", "stop_task", "until"]

STOP_WITHIN = 10.0  # seconds a cancelled task gets to finish before the test fails


async def stop_task(task: asyncio.Future[Any], timeout: float = STOP_WITHIN) -> None:
    """Cancel ``task`` and wait for it to end cancelled, at most ``timeout`` seconds. A task
    that ignores the cancel fails the test (it would hang the suite), so does one that
    swallows it and returns; an exception it ended with instead is raised here."""
    task.cancel()
    done, _ = await asyncio.wait({task}, timeout=timeout)
    if not done:
        raise AssertionError(f"task did not stop within {timeout:g} s of a cancel: {task!r}")
    if task.cancelled():
        return
    if task.exception() is not None:
        raise task.exception()  # type: ignore[misc]
    raise AssertionError(f"task swallowed the cancel and returned: {task!r}")


async def until(check: Callable[[], Any], timeout: float = 5.0, step: float = 0.02) -> Any:
    """Poll ``check`` (plain or async) until it returns something truthy, which is
    returned, or ``timeout`` seconds pass, which fails the test."""
    loop = asyncio.get_running_loop()
    deadline = loop.time() + timeout
    while True:
        value = check()
        if asyncio.iscoroutine(value):
            value = await value
        if value:
            return value
        if loop.time() > deadline:
            raise AssertionError(f"condition not met within {timeout:g} s")
        await asyncio.sleep(step)


class FakeClock:
    """A clock a test sets by hand: ``clock()`` is ``clock.t`` (epoch seconds)."""

    def __init__(self, t: float = 1000.0) -> None:
        self.t = t

    def __call__(self) -> float:
        return self.t

    def advance(self, seconds: float) -> None:
        self.t += seconds
