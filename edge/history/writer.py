"""The history writer: the evaluation loop hands it a frame per pass (a cheap capture and
a queue put); a thread of its own writes them, seals complete windows, makes the coarser
tiers (a slice of the series between one batch of frames and the next) and prunes, one
small step at a time, so nothing of it runs on the event loop.

Owned like every task of the service: ``start`` opens the file (StorageError when it
cannot), ``stop`` writes what is queued and closes it. A write that fails is logged once
and retried with the next batch; the monitor runs on without history rather than stop.
"""

from __future__ import annotations

import queue
import threading
import time
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from edge.errors import StorageError
from edge.history.buckets import Tier, tiers
from edge.history.frames import Frame, Layout
from edge.history.store import HistoryStore, SourceChange
from edge.logs import get_logger
from edge.model import PointState, Sample

__all__ = ["HistoryWriter", "WriterSettings"]

HOUSEKEEPING_EVERY = 5.0  # s between prune steps (and looks for a roll-up due)
MAX_QUEUE = 600  # frames waiting (10 min at 1 s); beyond it new ones are dropped
_STOP = object()


@dataclass(frozen=True, slots=True)
class WriterSettings:
    path: str
    ladder: tuple[Tier, ...]
    max_bytes: int

    @classmethod
    def from_config(cls, config: Any) -> WriterSettings | None:
        """The settings of ``config.storage.history``; None when it is disabled."""
        from edge.history.store import history_path

        history = config.storage.history
        if not history.enabled:
            return None
        ladder = tiers(history.full_rate, history.minute_keep, history.retention)
        path = history_path(config.storage.path, history.path)
        return cls(path, ladder, int(history.max_size))


class HistoryWriter:
    def __init__(self, settings: WriterSettings) -> None:
        self.settings = settings
        self._queue: queue.Queue[Any] = queue.Queue()
        self._thread: threading.Thread | None = None
        self._store: HistoryStore | None = None
        self._layout: Layout | None = None
        self._up: dict[str, bool] = {}
        self._log = get_logger(component="history")
        self.frames_written = 0
        self.frames_dropped = 0
        self.write_errors = 0
        self.busy_seconds = 0.0  # thread CPU spent writing (for the bench)
        self._failing = False

    @property
    def path(self) -> str:
        return self.settings.path

    @property
    def ladder(self) -> tuple[Tier, ...]:
        return self.settings.ladder

    def start(self) -> None:
        """Open the file (raises StorageError) and start the thread."""
        self._store = HistoryStore.open(self.settings.path, self.settings.ladder)
        self._thread = threading.Thread(target=self._run, name="history-writer", daemon=True)
        self._thread.start()

    def set_layout(self, points: list[str], tags: list[str]) -> None:
        """The series of the running config (after start and after a reload)."""
        self._layout = Layout.of(points, tags)

    def follow(self, config: Any) -> None:
        """``set_layout`` for a config's points and tags."""
        self.set_layout([p.name for p in config.points], list(config.tags()))

    # --- the hot path ----------------------------------------------------------------

    def record(
        self,
        now: float,
        points: Mapping[str, PointState],
        snapshot: Mapping[str, Sample],
        sources: Mapping[str, Any] | None = None,
    ) -> None:
        """Capture one pass (called on the event loop; never blocks)."""
        layout = self._layout
        if layout is None or self._thread is None:
            return
        if self._queue.qsize() >= MAX_QUEUE:
            self.frames_dropped += 1
            return
        self._queue.put(Frame.capture(now, layout, points, snapshot))
        for name, source in (sources or {}).items():
            health = source.health
            up = bool(health.up)
            if self._up.get(name) != up:
                self._up[name] = up
                detail = getattr(health, "last_error", None)
                self._queue.put(SourceChange(now, name, up, str(detail) if detail else None))

    # --- the thread ------------------------------------------------------------------

    def _run(self) -> None:
        store = self._store
        assert store is not None
        last_housekeeping = 0.0
        rolling = False  # a roll-up under way: a slice of it each turn, between frames
        stopping = False
        while not stopping:
            items: list[Any] = []
            try:
                items.append(self._queue.get(timeout=1.0))
                while True:
                    items.append(self._queue.get_nowait())
            except queue.Empty:
                pass
            stopping = any(i is _STOP for i in items)
            t0 = time.thread_time()
            frames = [i for i in items if isinstance(i, Frame)]
            changes = [i for i in items if isinstance(i, SourceChange)]
            if frames or changes:
                self._write(store, frames, changes)
            now = time.time()
            due = stopping or now - last_housekeeping >= HOUSEKEEPING_EVERY
            if rolling or due:
                rolling = self._roll_up(store)
            if due:
                last_housekeeping = now
                self._prune(store, now)
            self.busy_seconds += time.thread_time() - t0
        store.close()

    def _write(self, store: HistoryStore, frames: list[Frame], changes: list[SourceChange]) -> None:
        try:
            self.frames_written += store.write(frames, changes)
            if frames:
                store.seal(frames[-1].time)
        except StorageError as exc:
            self.write_errors += 1
            self.frames_dropped += len(frames)
            if not self._failing:
                self._log.error("history_write_failed", error=str(exc))
            self._failing = True
            return
        if self._failing:
            self._log.info("history_write_recovered")
        self._failing = False

    def _roll_up(self, store: HistoryStore) -> bool:
        """One slice of the first tier with a window due (a fraction of a second at
        30,000 series, so frames wait no longer); True while there is more to do."""
        try:
            for tier in self.settings.ladder[1:]:
                if store.roll_up_part(tier.index):
                    return True
        except StorageError as exc:
            self._log.error("history_housekeeping_failed", error=str(exc))
        return False

    def _prune(self, store: HistoryStore, now: float) -> None:
        try:
            store.prune(now, self.settings.max_bytes)
        except StorageError as exc:
            self._log.error("history_housekeeping_failed", error=str(exc))

    def stop(self, timeout: float = 5.0) -> None:
        """Write what is queued, close the file; at most ``timeout`` s."""
        thread, self._thread = self._thread, None
        if thread is None:
            return
        self._queue.put(_STOP)
        thread.join(timeout)
        if thread.is_alive():
            self._log.warning("history_stop_timeout", waited=timeout)

    def backlog(self) -> int:
        return self._queue.qsize()


def default_ladder() -> tuple[Tier, ...]:
    return tiers(6 * 3600.0, 7 * 86400.0, 30 * 86400.0)
