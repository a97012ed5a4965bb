"""Read access to a running monitor: what the web app (through ``edge.web.port``), the
metrics and the demo's live view look at. ``edge.service.Monitor`` fills these fields;
nothing here changes state. Reads come from live, in-memory state; the journal is asked
only for what only it knows (event counts, the event list)."""

from __future__ import annotations

import time
from collections.abc import Callable, Mapping

from edge import __version__
from edge.alarms.definitions import AlarmDef
from edge.alarms.health import AlarmHealth
from edge.alarms.journal import Journal
from edge.alarms.state import AlarmState
from edge.config import Config
from edge.errors import StorageError
from edge.evaluation import Compiled, Runtime
from edge.history import HistoryWriter
from edge.logs import TALLY
from edge.model import AlarmEvent, BarometerReading, PointState, Sample
from edge.notify import DeliveryWorker, Outbox
from edge.service.delivery import NotifyWorkers
from edge.service.publishing import Publishers
from edge.service.tasks import EvaluationLoop, SourceSet
from edge.sources.base import Source
from edge.web.metrics import ALARM_NAMES, HEALTH_NAMES, PROPERTY_NAMES, AlarmRow, LiveView

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
    _rows: _AlarmRows | None = None  # made on the first scrape that shows alarms

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
    def alarm_defs(self) -> Mapping[str, AlarmDef]:
        return self.runtime.plan.alarms if self.runtime else {}

    @property
    def alarm_states(self) -> Mapping[str, AlarmState]:
        return self.runtime.states if self.runtime else {}

    @property
    def snapshot(self) -> Mapping[str, Sample]:
        return self.runtime.snapshot if self.runtime else {}

    @property
    def sources(self) -> Mapping[str, Source]:
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

    def events(
        self,
        since: int = 0,
        limit: int = 100,
        *,
        from_time: float | None = None,
        alarm: str | None = None,
    ) -> list[AlarmEvent]:
        if self.journal is None:
            return []
        return self.journal.events(since, limit, from_time=from_time, alarm=alarm)

    def alarm_health(self) -> AlarmHealth | None:
        """Alarm-system health now: rates and chattering from the journal's event counts,
        stale alarms from the in-memory states. None without a journal; StorageError when
        the journal cannot be read."""
        if self.journal is None:
            return None
        causes = [n for n, d in self.alarm_defs.items() if getattr(d, "is_cause", False)]
        return self.journal.health(self.clock(), self.alarm_states, causes)

    def live_view(self, wanted: set[str] | None = None) -> LiveView:
        """What /metrics shows, gathered at scrape time (references to live state). With
        ``wanted`` (metric names), what those need and no more: no enthalpy/density pass, no
        journal query, unless asked for."""
        every = wanted is None
        full = every or bool(wanted & PROPERTY_NAMES)
        runtime = self.runtime
        points = (runtime.points if full else runtime.light) if runtime is not None else {}
        rows: list[AlarmRow] = []
        if every or wanted & ALARM_NAMES:
            if self._rows is None:
                self._rows = _AlarmRows()
            rows = self._rows.of(self.alarm_states)
        pending: dict[str, int] = {}
        if self.outbox is not None and (every or "steamedge_notifications_pending" in wanted):
            try:
                pending = self.outbox.pending_counts([c.name for c in self.config.notify])
            except StorageError:
                pending = {}
        workers = self.workers
        return LiveView(
            version=__version__,
            site=self.config.site,
            points=points,
            barometer=self.barometer,
            alarms=rows,
            sources={n: s.health for n, s in self.sources.items()},
            notifications_pending=pending,
            notifications_sent={w.name: w.delivered_events for w in workers},
            notifications_failed={w.name: w.failed_attempts for w in workers},
            publish=self.publishers.figures(),
            alarm_health=self._health_figures() if every or wanted & HEALTH_NAMES else {},
            evaluations=self.evaluations,
            evaluation_seconds=self.evaluation_seconds,
            last_evaluation=self.last_evaluation,
            reloads=dict(self.reloads),
            storage_ok=self.storage_ok,
            started=self.started,
            guard=self._guard(),
            flows=runtime.flows if runtime is not None else {},
            totals=runtime.totals if runtime is not None else {},
        )

    def _guard(self) -> dict[tuple[str, str], int]:
        out = TALLY.snapshot()
        if self.journal is not None and self.journal.quarantined:
            out[("journal", "quarantined")] = self.journal.quarantined
        return out

    def _health_figures(self) -> dict[str, float]:
        states = self.alarm_states
        out = {
            "standing": float(sum(1 for s in states.values() if s.active)),
            "shelved": float(sum(1 for s in states.values() if s.shelved)),
            "suppressed": float(sum(1 for s in states.values() if s.suppressed)),
        }
        try:
            h = self.alarm_health()
        except StorageError:
            return out
        if h is None:
            return out
        out.update(
            raised_10m=float(h.rate_10min),
            raised_1h=float(h.rate_hour),
            flood=float(h.flood),
            chattering=float(len(h.chattering)),
            stale=float(len(h.stale)),
            causes=float(len(h.causes)),
        )
        return out


class _AlarmRows:
    """The metrics' row of every alarm, by name, made again only for an alarm whose state
    changed since the last scrape, and the old row kept when the new one equals it: the
    metrics then see the same row objects and reuse the text of their alarm families
    (5,500 alarms at 10,000 tags, most of them standing still between scrapes)."""

    def __init__(self) -> None:
        self._known: dict[str, tuple[AlarmState, AlarmRow]] = {}

    def of(self, states: Mapping[str, AlarmState]) -> list[AlarmRow]:
        """Rows of ``states``, sorted by alarm name."""
        known = self._known
        fresh: dict[str, tuple[AlarmState, AlarmRow]] = {}
        rows: list[AlarmRow] = []
        for name in sorted(states):
            s = states[name]
            seen = known.get(name)
            if seen is not None and seen[0] is s:
                row = seen[1]
            else:
                row = _alarm_row(name, s)
                if seen is not None and seen[1] == row:
                    row = seen[1]
            fresh[name] = (s, row)
            rows.append(row)
        self._known = fresh
        return rows


def _alarm_row(name: str, s: AlarmState) -> AlarmRow:
    return AlarmRow(
        name=name,
        priority=s.priority,
        state=s.state,
        active=s.active,
        unacknowledged=s.unacknowledged,
        shelved=s.shelved,
        out_of_service=s.out_of_service,
        suppressed=s.suppressed,
        latched=s.latched,
    )
