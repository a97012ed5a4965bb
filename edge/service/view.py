"""Read access to a running monitor: what the web app, the metrics and the demo's live
view look at. ``edge.service.Monitor`` fills these fields; nothing here changes state."""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping
from typing import Any

from edge.alarms.journal import Journal
from edge.alarms.state import AlarmState
from edge.config import Config
from edge.evaluation import Compiled, Runtime
from edge.history import HistoryWriter
from edge.model import AlarmEvent, BarometerReading, PointState, Sample
from edge.notify import DeliveryWorker, Outbox
from edge.service.publishing import Publishers
from edge.service.tasks import EvaluationLoop, SourceSet
from edge.service.wiring import NotifyWorkers, live_view
from edge.web.metrics import LiveView

__all__ = ["MonitorView"]


class MonitorView:
    """The read-only face of a monitor."""

    clock: Callable[[], float]
    runtime: Runtime | None
    journal: Journal | None
    outbox: Outbox | None
    history: HistoryWriter | None
    notify: NotifyWorkers | None
    publishers: Publishers
    url: str | None
    started: float
    evaluations: int
    evaluation_seconds: float
    last_evaluation: float
    reloads: dict[str, int]
    storage_ok: bool
    _sources: SourceSet
    _loop: EvaluationLoop | None
    _token: str | None

    @property
    def plan(self) -> Compiled:
        if self.runtime is None:
            raise RuntimeError("the monitor is not started")
        return self.runtime.plan

    @property
    def config(self) -> Config:
        return self.plan.config

    @property
    def points(self) -> Mapping[str, PointState]:
        """Every point with all its readings (enthalpy, entropy, density made on demand)."""
        return self.runtime.points if self.runtime else {}

    @property
    def barometer(self) -> BarometerReading | None:
        return self.runtime.barometer if self.runtime else None

    @property
    def alarm_defs(self) -> Mapping[str, Any]:
        return self.runtime.plan.alarms if self.runtime else {}

    @property
    def alarm_states(self) -> Mapping[str, AlarmState]:
        return self.runtime.states if self.runtime else {}

    @property
    def snapshot(self) -> Mapping[str, Sample]:
        return self.runtime.snapshot if self.runtime else {}

    @property
    def sources(self) -> Mapping[str, Any]:
        return self._sources.sources

    @property
    def workers(self) -> list[DeliveryWorker]:
        return self.notify.workers if self.notify else []

    @property
    def token(self) -> str | None:
        return self._token

    def alive(self) -> bool:
        """The evaluation loop runs and has run within a few ticks."""
        loop = self._loop
        if loop is None or not loop.running:
            return False
        return time.monotonic() - loop.last_run < 3 * loop.tick + 5.0

    def readiness(self) -> dict[str, bool]:
        """Config loaded, storage writable (last commit succeeded), a source delivered."""
        return {
            "config": self.runtime is not None,
            "storage": self.journal is not None and self.storage_ok,
            "source": any(s.health.delivered for s in self.sources.values()),
        }

    def events(self, since: int = 0, limit: int = 100) -> list[AlarmEvent]:
        if self.journal is None:
            return []
        return self.journal.events(since, limit)

    def live_view(self, wanted: set[str] | None = None) -> LiveView:
        """What /metrics shows, read at scrape time (only ``wanted`` metrics if given)."""
        return live_view(self, wanted)
