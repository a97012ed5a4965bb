"""Pieces of the service around the Monitor: the HTTP listen policy and server, the API
token, the notification workers, the log of point changes, and the live view the metrics
collector reads at scrape time."""

from __future__ import annotations

import asyncio
import contextlib
from collections.abc import Callable, Mapping
from typing import TYPE_CHECKING, Any

from edge import __version__
from edge.config import Config, parse_listen, secret
from edge.config.rules import is_loopback
from edge.errors import ConfigError, ConfigProblem, StorageError
from edge.logs import TALLY, get_logger
from edge.model import PointState
from edge.notify import DeliveryWorker, Outbox, build_channel
from edge.service.tasks import finish, stop_task
from edge.web.metrics import ALARM_NAMES, HEALTH_NAMES, PROPERTY_NAMES, AlarmRow, LiveView

if TYPE_CHECKING:
    from edge.service import Monitor

__all__ = [
    "NotifyWorkers",
    "PointLog",
    "build_channels",
    "is_loopback",
    "listen_address",
    "live_view",
    "read_token",
    "start_http",
]


def listen_address(config: Config) -> tuple[str, int]:
    """(host, port) of http.listen; port 0 picks a free one."""
    try:
        return parse_listen(config.http.listen)
    except ValueError as exc:
        raise ConfigError([ConfigProblem("http.listen", str(exc))]) from exc


def read_token(config: Config) -> str | None:
    """The API token from http.token_env / token_file. Listening anywhere but loopback
    without one is refused: the API would otherwise be readable by the whole network and
    its writes would be disabled anyway."""
    token = secret(config.http.token_env, config.http.token_file, what="http API token")
    host, _ = listen_address(config)
    if token is None and not is_loopback(host):
        raise ConfigError(
            [
                ConfigProblem(
                    "http.listen",
                    f"refusing to listen on {host} without an API token: set http.token_env "
                    "or http.token_file, or listen on 127.0.0.1",
                )
            ]
        )
    return token


async def start_http(monitor: Monitor, config: Config) -> tuple[Any, str]:
    """Serve the web app on http.listen; returns the aiohttp runner and the base URL."""
    from aiohttp import web

    from edge.web.app import build_app
    from edge.web.server import make_runner

    host, port = listen_address(config)
    runner = make_runner(build_app(monitor))
    await runner.setup()
    site = web.TCPSite(runner, host, port, reuse_address=True)
    try:
        await site.start()
    except OSError as exc:
        await runner.cleanup()
        reason = exc.strerror or str(exc)
        raise ConfigError(
            [ConfigProblem("http.listen", f"cannot listen on {host}:{port}: {reason}")]
        ) from exc
    bound = runner.addresses[0]
    shown = f"[{bound[0]}]" if ":" in bound[0] else bound[0]
    return runner, f"http://{shown}:{bound[1]}"


def build_channels(configs: list[Any], clock: Callable[[], float]) -> list[tuple[Any, Any]]:
    """A channel per notify entry; every problem of every entry in one ConfigError."""
    out: list[tuple[Any, Any]] = []
    problems: list[ConfigProblem] = []
    for cfg in configs:
        try:
            out.append((cfg, build_channel(cfg, clock=clock)))
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

    def start(self, cfg: Any, channel: Any) -> None:
        worker = DeliveryWorker(self._outbox, channel, clock=self._clock)
        task = asyncio.create_task(worker.run(), name=f"notify:{cfg.name}")
        self._running[cfg.name] = (worker, task)

    async def stop(self, names: list[str]) -> None:
        for name in names:
            if name not in self._running:
                continue
            worker, task = self._running.pop(name)
            await stop_task(task, 2.0)
            close = getattr(worker.channel, "aclose", None)
            if close is not None:
                with contextlib.suppress(Exception):
                    await finish(close(), 1.0)

    async def stop_all(self) -> None:
        await self.stop(list(self._running))


class PointLog:
    """Logs a point whose quality or commissioning hint changed: one line per change, with
    the point's name. A point waiting for its first data (``no_data``) is not news, nor is
    its first good pass after that; the first bad or hinted pass is."""

    def __init__(self) -> None:
        self._marks: dict[str, tuple[int, str | None, str | None]] = {}
        self._log = get_logger(component="points")

    def observe(self, points: Mapping[str, PointState]) -> None:
        marks = self._marks
        for name, p in points.items():
            q = p.quality
            mark = (int(q.level), q.reason, p.hint_text)
            before = marks.get(name)
            if mark == before:
                continue
            marks[name] = mark
            hint = mark[2]
            if _waiting(mark) or ((before is None or _waiting(before)) and q.good and not hint):
                continue
            worse = (
                before is None
                or _waiting(before)
                or mark[0] < before[0]
                or bool(hint and hint != before[2])
            )
            (self._log.warning if worse else self._log.info)(
                "point_changed",
                point=name,
                quality=q.name,
                reason=q.reason,
                hint=hint,
                was=_mark_text(before),
            )

    def keep(self, names: set[str]) -> None:
        """Forget points no longer configured (after a reload)."""
        self._marks = {k: v for k, v in self._marks.items() if k in names}


def _waiting(mark: tuple[int, str | None, str | None]) -> bool:
    return mark[1] is not None and mark[1].endswith("no_data")


def _mark_text(mark: tuple[int, str | None, str | None] | None) -> str | None:
    if mark is None:
        return None
    word = ("bad", "uncertain", "good")[mark[0]]
    return f"{word}({mark[1]})" if mark[1] else word


def _alarm_health(monitor: Monitor, now: float) -> dict[str, float]:
    states = monitor.alarm_states
    out = {
        "standing": float(sum(1 for s in states.values() if s.active)),
        "shelved": float(sum(1 for s in states.values() if s.shelved)),
    }
    if monitor.journal is None:
        return out
    try:
        h = monitor.journal.health(now)
    except StorageError:
        return out
    out.update(
        raised_10m=float(h.rate_10min),
        raised_1h=float(h.rate_hour),
        flood=float(h.flood),
        chattering=float(len(h.chattering)),
        stale=float(len(h.stale)),
    )
    return out


def _guard(monitor: Monitor) -> dict[tuple[str, str], int]:
    out = TALLY.snapshot()
    if monitor.journal is not None and monitor.journal.quarantined:
        out[("journal", "quarantined")] = monitor.journal.quarantined
    return out


def live_view(monitor: Monitor, wanted: set[str] | None = None) -> LiveView:
    """What /metrics shows, gathered at scrape time (references to live state). With
    ``wanted`` (metric names), what those need and no more: no enthalpy/density pass, no
    journal query, unless asked for."""
    now = monitor.clock()
    every = wanted is None
    full = every or bool(wanted & PROPERTY_NAMES)
    runtime = monitor.runtime
    points = (runtime.points if full else runtime.light) if runtime is not None else {}
    rows = (
        []
        if not (every or wanted & ALARM_NAMES)
        else [
            AlarmRow(
                name=name,
                priority=s.priority,
                state=s.state,
                active=s.active,
                unacknowledged=s.unacknowledged,
                shelved=s.shelved,
                out_of_service=s.out_of_service,
                suppressed=s.suppressed,
            )
            for name, s in sorted(monitor.alarm_states.items())
        ]
    )
    pending: dict[str, int] = {}
    if monitor.outbox is not None and (every or "steamedge_notifications_pending" in wanted):
        try:
            pending = monitor.outbox.pending_counts([c.name for c in monitor.config.notify])
        except StorageError:
            pending = {}
    workers: list[Any] = monitor.workers
    return LiveView(
        version=__version__,
        site=monitor.config.site,
        points=points,
        barometer=monitor.barometer,
        alarms=rows,
        sources={n: s.health for n, s in monitor.sources.items()},
        notifications_pending=pending,
        notifications_sent={w.name: w.delivered_events for w in workers},
        notifications_failed={w.name: w.failed_attempts for w in workers},
        publish=monitor.publishers.figures(),
        alarm_health=_alarm_health(monitor, now) if every or wanted & HEALTH_NAMES else {},
        evaluations=monitor.evaluations,
        evaluation_seconds=monitor.evaluation_seconds,
        last_evaluation=monitor.last_evaluation,
        reloads=dict(monitor.reloads),
        storage_ok=monitor.storage_ok,
        started=monitor.started,
        guard=_guard(monitor),
        flows=runtime.flows if runtime is not None else {},
        totals=runtime.totals if runtime is not None else {},
    )
