"""The port the web app drives: what it reads of a running monitor and the few things it
asks it to do. ``edge.service.Monitor`` implements it; the web package imports this
Protocol, never the service, so the dependency runs one way (service -> web)."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING, Protocol

if TYPE_CHECKING:
    from edge.alarms.definitions import AlarmDef
    from edge.alarms.health import AlarmHealth
    from edge.alarms.journal import Journal
    from edge.alarms.state import AlarmState
    from edge.config import Config
    from edge.evaluation import Runtime
    from edge.history import HistoryWriter
    from edge.model import AlarmEvent, BarometerReading, PointState
    from edge.sources.base import Source
    from edge.web.metrics import LiveView

__all__ = ["MonitorPort"]


class MonitorPort(Protocol):
    """A running monitor as the HTTP handlers see it."""

    clock: Callable[[], float]
    runtime: Runtime | None  # the running plan's live state (flows, totals)
    journal: Journal | None  # event queries by time (history)
    history: HistoryWriter | None

    @property
    def config(self) -> Config: ...

    @property
    def token(self) -> str | None:
        """The API token; None: requests that change state are disabled."""
        ...

    @property
    def points(self) -> Mapping[str, PointState]: ...

    @property
    def barometer(self) -> BarometerReading | None: ...

    @property
    def sources(self) -> Mapping[str, Source]: ...

    @property
    def alarm_defs(self) -> Mapping[str, AlarmDef]: ...

    @property
    def alarm_states(self) -> Mapping[str, AlarmState]: ...

    def alarm_health(self) -> AlarmHealth | None:
        """Alarm-system health now (None without a journal); raises StorageError."""
        ...

    def events(
        self,
        since: int = 0,
        limit: int = 100,
        *,
        from_time: float | None = None,
        alarm: str | None = None,
    ) -> list[AlarmEvent]: ...

    def alive(self) -> bool: ...

    def readiness(self) -> dict[str, bool]: ...

    def live_view(self, wanted: set[str] | None = None) -> LiveView: ...

    async def act(
        self,
        kind: str,
        alarm: str,
        *,
        user: str,
        comment: str = "",
        duration: float | None = None,
    ) -> tuple[AlarmState | None, list[AlarmEvent]]:
        """An operator action, journalled before it returns; raises UnknownAlarm or
        OperatorError."""
        ...

    async def reload(self) -> dict[str, object]:
        """Re-read the config; raises ConfigError and keeps the running one."""
        ...
