"""The service: wires sources -> TagStore -> derive -> alarms -> journal/outbox -> metrics
and HTTP on one asyncio loop, with reload, shutdown and the systemd watchdog.

Programmatic use (the demo's live view uses it)::

    monitor = Monitor("config.yaml")
    await monitor.start()          # ConfigError / StorageError on a bad start
    monitor.points, monitor.alarm_states, monitor.barometer, monitor.url ...
    await monitor.stop()

or ``await serve("config.yaml", stop=event, on_ready=callback)``, which also handles
SIGTERM/SIGINT (stop) and SIGHUP (reload) when it runs on the main thread.

Start order: config -> plan -> journal (states) -> outbox and delivery workers -> sources
-> evaluation loop -> HTTP -> READY=1. Stop is the reverse, then the journal is flushed
and closed.
"""

from __future__ import annotations

import asyncio
import contextlib
import signal
import time
from collections.abc import Awaitable, Callable
from typing import Any

from edge import ADVISORY_NOTICE, __version__
from edge.alarms.journal import Journal
from edge.alarms.state import Action, AlarmState
from edge.alarms.text import COMMENT_MAX, USER_MAX, check_text
from edge.config import Config, load_config
from edge.config.rules import is_loopback
from edge.errors import ConfigError, ConfigProblem, StorageError, UnknownAlarm
from edge.evaluation import Runtime, compile_plan
from edge.history import HistoryWriter, WriterSettings
from edge.logs import get_logger
from edge.model import AlarmEvent, Sample
from edge.notify import Outbox
from edge.service import garbage
from edge.service.delivery import NotifyWorkers, build_channels
from edge.service.http import listen_address, read_token, start_http
from edge.service.point_log import PointLog
from edge.service.publishing import Publishers
from edge.service.sdnotify import Notifier
from edge.service.tasks import EvaluationLoop, SourceSet, finish
from edge.service.totals import TotalsStore, totals_path
from edge.service.view import MonitorView

__all__ = ["Monitor", "serve"]

PRUNE_EVERY = 3600.0  # s between journal/outbox pruning passes
STATE_SAVE_EVERY = 1.0  # s between saves of states changed without an event
FILE_CHECK_EVERY = 2.0  # s between checks that the journal file is still the one opened


class Monitor(MonitorView):
    """One running monitor. Read access (``MonitorView``): ``config``, ``points``,
    ``barometer``, ``alarm_defs``, ``alarm_states``, ``sources`` (name -> Source with
    ``health``), ``snapshot`` (tag -> Sample), ``url`` (HTTP base URL once started)."""

    def __init__(
        self,
        config_path: str,
        *,
        clock: Callable[[], float] = time.time,
        notifier: Notifier | None = None,
        tick: float = 1.0,
        http: bool = True,
    ) -> None:
        self.config_path = config_path
        self.clock = clock
        self.notifier = notifier if notifier is not None else Notifier.from_env()
        self._tick = tick
        self._http_enabled = http
        self._log = get_logger(component="service")
        self.runtime: Runtime | None = None
        self.journal: Journal | None = None
        self.outbox: Outbox | None = None
        self.history: HistoryWriter | None = None
        self._sources = SourceSet(self._emit)
        self.notify: NotifyWorkers | None = None
        self.publishers = Publishers(clock)
        self._loop: EvaluationLoop | None = None
        self._web: Any = None  # aiohttp AppRunner
        self._token: str | None = None
        self._reload_lock = asyncio.Lock()
        self._last_prune = 0.0
        self._last_file_check = 0.0
        self._last_state_save = 0.0
        self._last_status = ""
        self._point_log = PointLog()
        self._garbage = garbage.Pacer()
        self.url: str | None = None
        self.started = 0.0
        self.evaluations = 0
        self.evaluation_seconds = 0.0
        self.last_evaluation = 0.0
        self.reloads = {"ok": 0, "rejected": 0}
        self.storage_ok = True
        self.totals_store: TotalsStore | None = None
        self._totals_ok = True

    # --- lifecycle --------------------------------------------------------------------

    async def start(self) -> None:
        """Load the config and start everything; raises ConfigError/StorageError."""
        self.started = self.clock()
        self._log.info("advisory_only", notice=ADVISORY_NOTICE, version=__version__)
        config = load_config(self.config_path)
        plan = compile_plan(config)
        garbage.release()  # reading a big file leaves tens of MiB free but resident
        self._token = read_token(config)
        listen_address(config)
        channels = build_channels(config.notify, self.clock)
        self.journal = Journal.open(
            config.storage.path,
            site=config.site,
            retention=config.storage.retention,
            max_events=config.storage.max_events,
        )
        try:
            self.totals_store = TotalsStore.open(totals_path(config.storage.path))
            self.runtime = Runtime(plan, self.journal.load_states(), self.totals_store.load())
            self._start_history(config)
            self.outbox = Outbox(
                self.journal.connection,
                site=config.site,
                clock=self.clock,
                max_pending=config.storage.max_events,  # per channel
            )
            self.notify = NotifyWorkers(self.outbox, self.clock)
            for cfg, channel in channels:
                self.notify.start(cfg, channel)
            self.publishers.start(config, Publishers.build(config, self.clock))
            for source_cfg in config.sources:
                self._sources.start(source_cfg)
            self._loop = EvaluationLoop(
                self._evaluate,
                tick=self._tick,
                watchdog=self.notifier.watchdog,
                watchdog_interval=self.notifier.watchdog_interval,
            )
            self._loop.run_once()
            self._loop.start()
            if self._http_enabled:
                await self._start_http(config)
        except BaseException:
            await self.stop()
            raise
        self._log.info(
            "started",
            site=config.site,
            sources=len(config.sources),
            points=len(config.points),
            alarms=len(plan.alarms),
            url=self.url,
            api_writes="enabled" if self._token else "disabled (no token configured)",
        )
        self.notifier.ready(self._status_text())

    def _status_text(self) -> str:
        if self.runtime is None:
            return "starting"
        cfg = self.config
        up = sum(1 for s in self.sources.values() if s.health.up)
        return (
            f"advisory only; {up}/{len(cfg.sources)} sources up, {len(cfg.points)} points, "
            f"{len(self.plan.alarms)} alarms"
        )

    async def stop(self) -> None:
        """Stop in reverse order, then flush and close the journal. Safe to call twice."""
        if self.journal is None and self._loop is None and not self._sources.tasks:
            return  # nothing was started (e.g. the config was refused)
        self.notifier.stopping("stopping")
        self._log.info("stopping")
        if self._web is not None:
            runner, self._web = self._web, None
            await finish(runner.cleanup(), 2.0)
        if self._loop is not None:
            await self._loop.stop()
        await self.publishers.stop_all()
        await self._sources.stop_all()
        if self.history is not None:
            history, self.history = self.history, None
            await asyncio.to_thread(history.stop)
        if self.notify is not None:
            await self.notify.stop_all()
        if self.totals_store is not None:
            store, self.totals_store = self.totals_store, None
            try:
                if self.runtime is not None and self.runtime.totals:
                    store.save(self.runtime.totals)
                store.close()
            except StorageError as exc:
                self._log.error("totals_flush_failed", error=str(exc))
        if self.journal is not None:
            journal, self.journal = self.journal, None
            try:
                if self.runtime is not None:
                    journal.save_states(self.runtime.states)
                journal.close()
            except StorageError as exc:
                self._log.error("journal_flush_failed", error=str(exc))
        self._log.info("stopped")

    # --- sources, workers, HTTP, history ----------------------------------------------

    def _start_history(self, config: Config) -> None:
        """The history writer; a history file that cannot be opened is logged and the
        monitor runs without one (alarms and notifications do not depend on it)."""
        settings = WriterSettings.from_config(config)
        if settings is None:
            return
        writer = HistoryWriter(settings)
        try:
            writer.start()
        except StorageError as exc:
            self._log.error("history_unavailable", error=str(exc))
            return
        writer.follow(config)
        self.history = writer

    def _emit(self, samples: list[Sample]) -> None:
        if self.runtime is not None:
            self.runtime.ingest(samples)
        if self._loop is not None:
            self._loop.poke()

    async def _start_http(self, config: Config) -> None:
        self._web, self.url = await start_http(self, config)
        host, port = self._web.addresses[0][:2]
        self._log.info("http_listening", host=host, port=port, url=self.url)

    # --- evaluation and storage -------------------------------------------------------

    def _evaluate(self) -> None:
        runtime = self.runtime
        if runtime is None:
            return
        t0 = time.perf_counter()
        now = self.clock()
        events = runtime.evaluate(now)
        self._point_log.observe(runtime.light)
        if self.publishers.channels:  # queued only: the pass never waits on a broker
            health = {n: s.health for n, s in self.sources.items()}
            self.publishers.offer(runtime.light, runtime.snapshot, health, now)
        if runtime.totals:
            self._save_totals()
        if self.history is not None:
            self.history.record(now, runtime.light, runtime.snapshot, self.sources)
        if events or (self.journal is not None and self.journal.backlog):
            self._commit(events)
            self._last_state_save = now
        elif self.journal is not None and now - self._last_state_save >= STATE_SAVE_EVERY:
            # states that change without an event (an alarm following the process while
            # shelved) are saved too, so a restart does not judge a stale saved state
            self._last_state_save = now
            self._commit([])
        if self.journal is not None and now - self._last_file_check >= FILE_CHECK_EVERY:
            self._last_file_check = now
            try:
                self.journal.check()
            except StorageError as exc:
                self._storage_failed(exc)
        if now - self._last_prune > PRUNE_EVERY:
            self._prune(now)
        self._garbage.tick(now)
        if self.notifier.enabled:  # systemctl status shows how many sources are up
            status = self._status_text()
            if status != self._last_status:
                self._last_status = status
                self.notifier.status(status)
        self.evaluations += 1
        self.last_evaluation = now
        self.evaluation_seconds += time.perf_counter() - t0

    def _save_totals(self) -> None:
        """Flow totals to disk after every pass; a failure is logged once and retried."""
        if self.totals_store is None or self.runtime is None:
            return
        try:
            self.totals_store.save(self.runtime.totals)
        except StorageError as exc:
            if self._totals_ok:
                self._log.error("totals_save_failed", error=str(exc))
            self._totals_ok = False
            return
        self._totals_ok = True

    async def reset_flow(self, flow: str, *, user: str, comment: str = "") -> AlarmEvent:
        """Zero a flow's totals now, journal who did it and what the totals were; raises
        KeyError for an unknown flow."""
        runtime = self.runtime
        if runtime is None:
            raise RuntimeError("the monitor is not started")
        user = check_text(user, "user", USER_MAX)
        comment = check_text(comment or "", "comment", COMMENT_MAX)
        now = self.clock()
        before = runtime.reset_totals(flow, now)
        self._save_totals()
        event = AlarmEvent(
            alarm=flow,
            kind="totals_reset",
            time=now,
            priority="low",
            value=before.mass,
            user=user,
            comment=comment or None,
            message=(
                f"totals of flow {flow} reset by {user}: {before.mass:.6g} kg, "
                f"{before.energy:.6g} J, {before.not_measured:.6g} s not measured"
            ),
            state="reset",
        )
        stored = [event]
        if self.journal is not None:
            try:
                stored = self.journal.append([event])
            except StorageError as exc:
                self._log.error("storage_failed", error=str(exc))
        self._log.info("flow_totals_reset", flow=flow, user=user, mass=before.mass)
        return stored[0]

    def _commit(self, events: list[AlarmEvent]) -> list[AlarmEvent]:
        """Journal the events with the current states and queue their notifications, in
        one transaction. On failure the journal keeps them and retries on the next pass."""
        assert self.runtime is not None and self.journal is not None
        for e in events:
            self._log.info(
                "alarm_event",
                alarm=e.alarm,
                kind=e.kind,
                priority=e.priority,
                state=e.state,
                user=e.user,
                message=e.message,
                value=e.value,  # SI, in the alarm's frame (the message shows display units)
                limit=e.limit,
                quality=e.quality,
            )
        outbox, channels = self.outbox, self.config.notify

        def enqueue(_conn: Any, stored: list[AlarmEvent]) -> None:
            if outbox is not None and channels:
                outbox.enqueue(channels, stored)

        quarantined = self.journal.quarantined
        dropped = outbox.dropped if outbox is not None else 0
        try:
            stored = self.journal.commit(events, self.runtime.states, after=enqueue)
        except StorageError as exc:
            self._storage_failed(exc)
            return []
        if outbox is not None and outbox.dropped > dropped:
            self._log.warning(
                "outbox_dropped",
                rows=outbox.dropped - dropped,
                bound=outbox.max_pending,
                detail="the oldest least-urgent undelivered notifications beyond the bound "
                "were dropped (the journal keeps their events)",
            )
        if self.journal.quarantined > quarantined:
            self._log.error(
                "journal_quarantined",
                rows=self.journal.quarantined - quarantined,
                detail="rows that could never be written were set aside in the quarantine "
                "table; the rest were written",
            )
        if not self.storage_ok:
            self._log.info("storage_recovered", events=len(stored))
        self.storage_ok = True
        if stored and self.publishers.channels:
            self.publishers.offer_events(stored)
        return stored

    def _retire_channels(self, old: Config, new: Config) -> None:
        """Rows queued for channels the new config no longer has are set aside (kept in
        the file, marked retired) instead of counting as pending for ever."""
        kept = {c.name for c in new.notify}
        gone = [c.name for c in old.notify if c.name not in kept]
        if self.outbox is None or not gone:
            return
        try:
            n = self.outbox.retire(gone)
        except StorageError as exc:
            self._log.error("outbox_retire_failed", channels=gone, error=str(exc))
            return
        if n:
            self._log.warning("outbox_retired", channels=gone, rows=n)

    def _storage_failed(self, exc: StorageError) -> None:
        """One error line per failure episode; /readyz and steamedge_storage_ok show it."""
        if self.storage_ok:
            waiting = self.journal.backlog if self.journal is not None else 0
            self._log.error("storage_failed", error=str(exc), waiting=waiting)
        self.storage_ok = False

    def _prune(self, now: float) -> None:
        self._last_prune = now
        assert self.journal is not None
        try:
            self.journal.prune(now)
            if self.outbox is not None:
                self.outbox.prune(now - self.config.storage.retention)
        except StorageError as exc:
            self._log.error("prune_failed", error=str(exc))

    # --- operator actions -------------------------------------------------------------

    async def act(
        self,
        kind: str,
        alarm: str,
        *,
        user: str,
        comment: str = "",
        duration: float | None = None,
    ) -> tuple[AlarmState | None, list[AlarmEvent]]:
        """Apply an operator action now (journalled before returning); returns the alarm's
        new state and the events. Raises BadOperatorText (before any change), UnknownAlarm
        or OperatorError."""
        runtime = self.runtime
        if runtime is None:
            raise RuntimeError("the monitor is not started")
        # the text is checked before anything changes: a journal row must always be writable
        user = check_text(user, "user", USER_MAX)
        comment = check_text(comment or "", "comment", COMMENT_MAX)
        if kind != "ack_priority" and alarm not in runtime.plan.alarms:
            raise UnknownAlarm(alarm)
        action = Action(kind=kind, alarm=alarm, user=user, comment=comment, duration=duration)
        events = runtime.act(action, self.clock())
        stored = self._commit(events)
        self._log.info("operator_action", action=kind, alarm=alarm, user=user, events=len(events))
        return runtime.states.get(alarm), stored or events

    # --- reload -----------------------------------------------------------------------

    async def reload(self) -> dict[str, Any]:
        """Re-read the config. An invalid one raises ConfigError (every problem logged) and
        the running one stays; a valid one swaps sources, points, alarms and channels,
        alarms with the same name keeping their state."""
        async with self._reload_lock:
            self.notifier.reloading()
            try:
                summary = await self._reload()
            except ConfigError as exc:
                self.reloads["rejected"] += 1
                for problem in exc.problems:
                    self._log.error("reload_rejected", problem=str(problem))
                raise
            finally:
                self.notifier.ready(self._status_text())
            self.reloads["ok"] += 1
            self._log.info("reloaded", **summary)
            return summary

    async def _reload(self) -> dict[str, Any]:
        old = self.config
        config = load_config(self.config_path)
        plan = compile_plan(config)
        token = read_token(config)
        listen_address(config)
        running_host = listen_address(old)[0]  # http.listen changes only with a restart
        if token is None and self._web is not None and not is_loopback(running_host):
            raise ConfigError(
                [
                    ConfigProblem(
                        "http",
                        f"the running monitor listens on {running_host} (a new http.listen "
                        "needs a restart): a reload cannot drop the API token",
                        file=self.config_path,
                    )
                ]
            )
        channels = build_channels([c for c in config.notify if c not in old.notify], self.clock)
        publishing = self.publishers.prepare(old, config)
        # everything is valid from here on: swap
        for what, before, after in (
            ("http.listen", old.http.listen, config.http.listen),
            ("storage.path", old.storage.path, config.storage.path),
        ):
            if before != after:
                self._log.warning("reload_needs_restart", setting=what, running=before)
        self._token = token
        summary: dict[str, Any] = await self._sources.apply(config.sources)
        assert self.notify is not None
        await self.notify.stop([c.name for c in old.notify if c not in config.notify])
        self._retire_channels(old, config)
        for cfg, channel in channels:
            self.notify.start(cfg, channel)
        summary.update(await self.publishers.apply(config, publishing))
        assert self.runtime is not None
        retired = self.runtime.swap(plan, self.clock())
        if retired and self.journal is not None:
            self._commit(retired)  # ends their notifications (Alertmanager endsAt)
        self._point_log.keep({p.name for p in config.points})
        if self.history is not None:
            self.history.follow(config)
        if self.journal is not None:
            with contextlib.suppress(StorageError):
                self.journal.forget_states(plan.alarms.keys())
        if self._loop is not None:
            self._loop.run_once()
        return {**summary, "points": len(config.points), "alarms": len(plan.alarms)}


async def serve(
    config_path: str,
    *,
    stop: asyncio.Event | None = None,
    on_ready: Callable[[Monitor], Awaitable[None] | None] | None = None,
    notifier: Notifier | None = None,
) -> None:
    """Run a monitor until ``stop`` is set (or SIGTERM/SIGINT); SIGHUP reloads.
    ``on_ready(monitor)`` is called once everything runs. Raises ConfigError/StorageError
    when it cannot start."""
    stop = stop if stop is not None else asyncio.Event()
    monitor = Monitor(config_path, notifier=notifier)
    loop = asyncio.get_running_loop()
    installed: list[int] = []
    reloads: set[asyncio.Task[Any]] = set()

    def hup() -> None:
        task = asyncio.create_task(_reload_quietly(monitor))
        reloads.add(task)
        task.add_done_callback(reloads.discard)

    with contextlib.suppress(NotImplementedError, RuntimeError, ValueError):
        for sig, handler in ((signal.SIGTERM, stop.set), (signal.SIGINT, stop.set)):
            loop.add_signal_handler(sig, handler)
            installed.append(sig)
        loop.add_signal_handler(signal.SIGHUP, hup)
        installed.append(signal.SIGHUP)
    try:
        await monitor.start()
        garbage.settle()  # the collector off the hot path (edge.service.garbage)
        if on_ready is not None:
            result = on_ready(monitor)
            if asyncio.iscoroutine(result):
                await result
        await stop.wait()
    finally:
        for task in list(reloads):
            task.cancel()
        await monitor.stop()  # a second SIGTERM meanwhile changes nothing
        for sig in installed:
            loop.remove_signal_handler(sig)


async def _reload_quietly(monitor: Monitor) -> None:
    with contextlib.suppress(ConfigError):  # already logged; the old config keeps running
        await monitor.reload()
