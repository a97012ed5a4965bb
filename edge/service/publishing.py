"""The publishing channels of a running monitor: built from ``publish[]``, fed by the
evaluation pass and the journal, swapped on reload, stopped in order."""

from __future__ import annotations

import asyncio
from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING, Any

from edge.config import Config
from edge.errors import ConfigError, ConfigProblem
from edge.model import AlarmEvent, PointState, Sample

if TYPE_CHECKING:  # the MQTT client library is loaded only by a site that publishes
    from edge.publish.channel import PublishChannel

__all__ = ["Publishers"]


def _shape(config: Config) -> tuple[Any, ...]:
    """What a channel's birth declares: a change means the channel starts again (a new
    birth), as Sparkplug wants when the metrics change."""
    alarms = tuple(a.name for a in config.alarms)
    points = tuple((p.name, p.pressure, p.temperature) for p in config.points)
    return config.site, points, tuple(s.name for s in config.sources), alarms


class Publishers:
    """One ``PublishChannel`` per ``publish[]`` entry, each with its owned task."""

    def __init__(self, clock: Callable[[], float]) -> None:
        self.clock = clock
        self.channels: dict[str, PublishChannel] = {}
        self._shape: tuple[Any, ...] | None = None

    @staticmethod
    def build(config: Config, clock: Callable[[], float], names: set[str] | None = None):
        """Channels for ``config`` (only ``names`` if given); every problem in one error."""
        out: dict[str, PublishChannel] = {}
        problems: list[ConfigProblem] = []
        points = {p.name: tuple(t for t in (p.pressure, p.temperature) if t) for p in config.points}
        alarm_names = [a.name for a in config.alarms]
        for i, cfg in enumerate(config.publish):
            if names is not None and cfg.name not in names:
                continue
            from edge.publish.channel import PublishChannel

            try:
                out[cfg.name] = PublishChannel(
                    cfg,
                    site=config.site,
                    state_path=config.storage.path,
                    point_inputs=points,
                    sources=[s.name for s in config.sources],
                    alarms=alarm_names,
                    clock=clock,
                    where=f"publish[{i}]",
                )
            except ConfigError as exc:
                problems.extend(exc.problems)
        if problems:
            for ch in out.values():
                ch.queue.close()
            raise ConfigError(problems)
        return out

    def start(self, config: Config, channels: Mapping[str, PublishChannel]) -> None:
        self._shape = _shape(config)
        for name, ch in channels.items():
            self.channels[name] = ch
            ch.start()

    def offer(
        self,
        points: Mapping[str, PointState],
        snapshot: Mapping[str, Sample],
        sources: Mapping[str, Any],
        now: float,
    ) -> None:
        for ch in self.channels.values():
            ch.offer(points, snapshot, sources, now)

    def offer_events(self, events: list[AlarmEvent]) -> None:
        for ch in self.channels.values():
            ch.offer_events(events)

    def prepare(self, old: Config, config: Config) -> tuple[set[str], dict[str, PublishChannel]]:
        """For a reload: which channels start again (changed ones, and all of them when the
        points, sources or alarms changed: their birth must say so), built now, so that a
        bad one refuses the reload before anything is swapped."""
        reborn = _shape(config) != self._shape
        old_cfg = {c.name: c for c in old.publish}
        wanted = {c.name: c for c in config.publish}
        restart = {n for n in wanted if n not in old_cfg or old_cfg[n] != wanted[n] or reborn}
        gone = {n for n in self.channels if n not in wanted} | (restart & set(self.channels))
        return gone, self.build(config, self.clock, restart)

    async def apply(
        self, config: Config, prepared: tuple[set[str], dict[str, PublishChannel]]
    ) -> dict[str, list[str]]:
        gone, new = prepared
        await asyncio.gather(*(self.channels.pop(n).stop() for n in gone if n in self.channels))
        self.start(config, new)
        return {"publish_restarted": sorted(new)}

    async def stop_all(self) -> None:
        await asyncio.gather(*(ch.stop() for ch in self.channels.values()))
        self.channels.clear()

    def figures(self) -> dict[str, dict[str, float]]:
        """What /metrics shows per channel."""
        return {
            name: {
                "connected": float(ch.connected),
                "queued": float(ch.queue.size),
                "published": float(ch.published),
                "dropped": float(ch.queue.dropped),
                "dropped_alarms": float(ch.queue.dropped_alarms),
            }
            for name, ch in self.channels.items()
        }
