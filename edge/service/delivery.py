"""The notification side of the service: a channel per ``notify:`` entry, and one owned
delivery task per channel, started and stopped as the config comes and goes."""

from __future__ import annotations

import asyncio
import contextlib
from collections.abc import Callable, Sequence

from edge import config as cfg
from edge.errors import ConfigError, ConfigProblem
from edge.notify import Channel, DeliveryWorker, Outbox, build_channel
from edge.service.tasks import finish, stop_task

__all__ = ["NotifyWorkers", "build_channels"]


def build_channels(
    configs: Sequence[cfg.Channel], clock: Callable[[], float]
) -> list[tuple[cfg.Channel, Channel]]:
    """A channel per notify entry; every problem of every entry in one ConfigError."""
    out: list[tuple[cfg.Channel, Channel]] = []
    problems: list[ConfigProblem] = []
    for entry in configs:
        try:
            out.append((entry, build_channel(entry, clock=clock)))
        except ConfigError as exc:
            problems.extend(exc.problems)
    if problems:
        raise ConfigError(problems)
    return out


class NotifyWorkers:
    """One owned delivery task per channel."""

    def __init__(self, outbox: Outbox, clock: Callable[[], float]) -> None:
        self._outbox = outbox
        self._clock = clock
        self._running: dict[str, tuple[DeliveryWorker, asyncio.Task[None]]] = {}

    @property
    def workers(self) -> list[DeliveryWorker]:
        return [w for w, _ in self._running.values()]

    def start(self, entry: cfg.Channel, channel: Channel) -> None:
        worker = DeliveryWorker(self._outbox, channel, clock=self._clock)
        task = asyncio.create_task(worker.run(), name=f"notify:{entry.name}")
        self._running[entry.name] = (worker, task)

    async def stop(self, names: list[str]) -> None:
        for name in names:
            if name not in self._running:
                continue
            worker, task = self._running.pop(name)
            await stop_task(task, 2.0)
            with contextlib.suppress(Exception):
                await finish(worker.channel.aclose(), 1.0)

    async def stop_all(self) -> None:
        await self.stop(list(self._running))
