"""The outbox: a durable queue of notifications in the same SQLite file as the journal.

One row per (channel, event) a channel wants. A row stays until a delivery worker marks it
delivered, so whatever was queued before a crash or a power cut is sent after the restart
(at-least-once; the event key ``site/<journal id>`` lets a receiver drop duplicates).
``(channel, key)`` is unique: queueing the same event twice keeps one row.

Every statement is short and runs on the caller's thread (the event loop); a failure to
write raises ``StorageError``: a notification is never dropped silently. When the caller
already holds a transaction (journal append + enqueue), the outbox joins it and leaves the
commit to the caller.
"""

from __future__ import annotations

import dataclasses
import json
import math
import sqlite3
import time
from collections.abc import Callable, Iterable, Iterator
from contextlib import contextmanager
from typing import Any

from edge import config
from edge.errors import StorageError
from edge.logs import TALLY
from edge.model import PRIORITIES, AlarmEvent
from edge.notify.base import ACTIVE_KINDS, ENDED_KINDS, OutboxItem, wants

__all__ = ["Outbox"]

SCHEMA = """
CREATE TABLE IF NOT EXISTS outbox (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    channel TEXT NOT NULL,
    key TEXT NOT NULL,
    event_id INTEGER,
    alarm TEXT NOT NULL,
    kind TEXT NOT NULL,
    priority TEXT NOT NULL,
    payload TEXT NOT NULL,
    created REAL NOT NULL,
    next_try REAL NOT NULL,
    attempts INTEGER NOT NULL DEFAULT 0,
    last_error TEXT,
    delivered REAL
);
CREATE UNIQUE INDEX IF NOT EXISTS outbox_channel_key ON outbox (channel, key);
CREATE INDEX IF NOT EXISTS outbox_pending ON outbox (channel, next_try) WHERE delivered IS NULL;
CREATE INDEX IF NOT EXISTS outbox_alarm ON outbox (channel, alarm, id);
CREATE INDEX IF NOT EXISTS outbox_pending_alarm ON outbox (channel, alarm, id, priority, next_try)
    WHERE delivered IS NULL;
"""
RETIRED = "retired: "  # last_error of a row set aside undelivered (its channel was removed)
_RANK = (  # SQL: a priority's place in PRIORITIES (0 most urgent; unknown counts as 0)
    "CASE priority "
    + " ".join(f"WHEN '{p}' THEN {i}" for i, p in enumerate(PRIORITIES))
    + " ELSE 0 END"
)
# Due rows, in delivery order. Per alarm, rows go in journal order and none overtakes an
# older row still waiting for its retry (``blocked``); alarms go by their most urgent
# pending priority, then the alarm with the newest event first, so a fresh critical alarm
# is not queued behind a backlog of old low-priority ones.
_DUE = f"""
WITH alarms AS (
    SELECT alarm, MIN({_RANK}) AS rank, MAX(id) AS newest,
           MIN(CASE WHEN next_try > :now THEN id END) AS blocked,
           MIN(CASE WHEN next_try <= :now THEN id END) AS first_due
    FROM outbox WHERE channel = :channel AND delivered IS NULL GROUP BY alarm
), top AS (
    SELECT alarm, rank, newest, blocked FROM alarms
    WHERE first_due IS NOT NULL AND (blocked IS NULL OR first_due < blocked)
    ORDER BY rank, newest DESC LIMIT :limit
)
SELECT o.id, o.channel, o.key, o.payload, o.created, o.attempts
FROM top a JOIN outbox o INDEXED BY outbox_pending_alarm
    ON o.channel = :channel AND o.alarm = a.alarm
WHERE o.delivered IS NULL AND o.next_try <= :now AND (a.blocked IS NULL OR o.id < a.blocked)
ORDER BY a.rank, a.newest DESC, o.id
LIMIT :limit
"""

_COLUMNS = "id, channel, key, payload, created, attempts"
_EVENT_FIELDS = frozenset(f.name for f in dataclasses.fields(AlarmEvent))


def _channel_name(channel: str | config.Channel) -> str:
    return channel if isinstance(channel, str) else channel.name


def _event_json(event: AlarmEvent) -> str:
    data = dataclasses.asdict(event)
    for name in ("value", "limit"):
        v = data[name]
        if isinstance(v, float) and not math.isfinite(v):
            data[name] = None  # JSON has no NaN or infinity
    return json.dumps(data, separators=(",", ":"), allow_nan=False)


def _event_from_json(text: str) -> AlarmEvent:
    data: dict[str, Any] = json.loads(text)
    return AlarmEvent(**{k: v for k, v in data.items() if k in _EVENT_FIELDS})


class Outbox:
    """Durable notification queue on an open SQLite connection (WAL mode recommended)."""

    def __init__(
        self,
        conn: sqlite3.Connection,
        *,
        site: str,
        clock: Callable[[], float] = time.time,
        max_pending: int | None = None,
    ) -> None:
        self._conn = conn
        self.site = site
        self._clock = clock
        self.max_pending = max_pending  # per channel; None: unbounded
        self.dropped = 0  # rows dropped at the bound since start
        self._estimate: dict[str, int] = {}  # pending per channel, counted when unsure
        self._listeners: list[Callable[[str], None]] = []
        try:
            with self._tx() as c:
                for statement in SCHEMA.split(";"):
                    if statement.strip():
                        c.execute(statement)
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot create its table: {exc}") from exc

    @contextmanager
    def _tx(self) -> Iterator[sqlite3.Connection]:
        conn = self._conn
        if conn.in_transaction:  # the caller's transaction: join it, the caller commits
            yield conn
            return
        if conn.isolation_level is None:
            conn.execute("BEGIN IMMEDIATE")
        try:
            yield conn
        except BaseException:
            if conn.in_transaction:
                conn.rollback()
            raise
        if conn.in_transaction:
            conn.commit()

    def add_listener(self, listener: Callable[[str], None]) -> None:
        """Call ``listener(channel_name)`` after rows for that channel were queued."""
        self._listeners.append(listener)

    def remove_listener(self, listener: Callable[[str], None]) -> None:
        if listener in self._listeners:
            self._listeners.remove(listener)

    def key_of(self, event: AlarmEvent) -> str:
        """The idempotency key: the journal's key, else ``site/<journal id>``."""
        if event.key:
            return event.key
        if event.id is None:
            raise ValueError(
                f"event {event.alarm}/{event.kind} has no journal id: journal it first"
            )
        return f"{self.site}/{event.id}"

    def enqueue(self, channels: Iterable[config.Channel], events: list[AlarmEvent]) -> int:
        """Queue every event for every channel that wants it; return the rows added.

        Raises StorageError when the file cannot be written (read-only, full, locked)."""
        now = self._clock()
        rows: list[tuple[Any, ...]] = []
        touched: set[str] = set()
        for cfg in channels:
            for event in events:
                if not wants(cfg, event) and not self._owes_end(cfg, event):
                    continue
                key = self.key_of(event)
                rows.append(
                    (
                        cfg.name,
                        key,
                        event.id,
                        event.alarm,
                        event.kind,
                        event.priority,
                        _event_json(dataclasses.replace(event, key=key)),
                        now,
                        now,
                    )
                )
                touched.add(cfg.name)
        if not rows:
            return 0
        try:
            with self._tx() as c:
                before = c.total_changes
                c.executemany(
                    "INSERT OR IGNORE INTO outbox (channel, key, event_id, alarm, kind, priority,"
                    " payload, created, next_try) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
                    rows,
                )
                added = c.total_changes - before
                for name in touched:
                    self._bound(c, name, added)
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot queue {len(rows)} notification(s): {exc}") from exc
        for name in sorted(touched):
            for listener in self._listeners:
                listener(name)
        return added

    def _owes_end(self, cfg: config.Channel, event: AlarmEvent) -> bool:
        """A channel told of an alarm's raise is told of its end, even when the alarm now
        sits below the channel's ``min_priority`` (a reload lowered it)."""
        if event.kind not in ENDED_KINDS:
            return False
        row = self._conn.execute(
            "SELECT kind FROM outbox WHERE channel = ? AND alarm = ? "
            "AND (last_error IS NULL OR last_error NOT LIKE 'retired: %') "
            "ORDER BY id DESC LIMIT 1",
            (cfg.name, event.alarm),
        ).fetchone()
        return row is not None and row[0] in ACTIVE_KINDS

    def _bound(self, c: sqlite3.Connection, channel: str, added: int) -> None:
        """Keep at most ``max_pending`` undelivered rows per channel: beyond it the oldest
        rows of the least urgent priority go first, never the newest row of an alarm (so
        every alarm's latest state still reaches the receiver). The journal keeps every
        event; only these notifications are dropped, counted in ``dropped``."""
        bound = self.max_pending
        if bound is None:
            return
        estimate = self._estimate.get(channel)
        if estimate is not None and estimate + added <= bound:
            self._estimate[channel] = estimate + added
            return
        (pending,) = c.execute(
            "SELECT COUNT(*) FROM outbox WHERE channel = ? AND delivered IS NULL", (channel,)
        ).fetchone()
        excess = int(pending) - bound
        if excess > 0:
            cur = c.execute(
                f"DELETE FROM outbox WHERE id IN (SELECT id FROM outbox WHERE channel = ? "
                f"AND delivered IS NULL AND id NOT IN (SELECT MAX(id) FROM outbox "
                f"WHERE channel = ? AND delivered IS NULL GROUP BY alarm) "
                f"ORDER BY {_RANK} DESC, id LIMIT ?)",
                (channel, channel, excess),
            )
            gone = max(cur.rowcount, 0)
            self.dropped += gone
            TALLY.add("outbox", "dropped_at_bound", gone)
            pending = int(pending) - gone
        self._estimate[channel] = int(pending)

    def retire(self, channels: Iterable[str]) -> int:
        """Set aside the undelivered rows of channels no longer configured (after a
        reload): they stay in the file, marked ``retired: ...`` with the time, and are no
        longer pending. Returns how many."""
        names = list(channels)
        if not names:
            return 0
        now = self._clock()
        try:
            with self._tx() as c:
                before = c.total_changes
                c.executemany(
                    "UPDATE outbox SET delivered = ?, last_error = ? "
                    "WHERE channel = ? AND delivered IS NULL",
                    [(now, RETIRED + "the channel was removed by a reload", n) for n in names],
                )
                n = c.total_changes - before
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot retire rows: {exc}") from exc
        for name in names:
            self._estimate.pop(name, None)
        return n

    def _read(self, sql: str, params: tuple[Any, ...] | dict[str, Any]) -> list[Any]:
        try:
            return self._conn.execute(sql, params).fetchall()
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot read: {exc}") from exc

    def _item(self, row: tuple[Any, ...]) -> OutboxItem:
        rid, channel, key, payload, created, attempts = row
        return OutboxItem(
            id=rid,
            channel=channel,
            key=key,
            event=_event_from_json(payload),
            site=self.site,
            created=created,
            attempts=attempts,
        )

    def due(self, channel: str | config.Channel, now: float, limit: int = 100) -> list[OutboxItem]:
        """Undelivered items of this channel whose next try has come, in delivery order
        (see ``_DUE``: per alarm in journal order, never ahead of an older retry; urgent
        alarms first)."""
        rows = self._read(_DUE, {"channel": _channel_name(channel), "now": now, "limit": limit})
        return [self._item(r) for r in rows]

    def next_try(self, channel: str | config.Channel) -> float | None:
        """When the earliest undelivered item of this channel may be tried, None if none."""
        rows = self._read(
            "SELECT MIN(next_try) FROM outbox WHERE channel = ? AND delivered IS NULL",
            (_channel_name(channel),),
        )
        return rows[0][0] if rows else None

    def pending(self, channel_name: str) -> int:
        """Items of this channel not yet delivered."""
        rows = self._read(
            "SELECT COUNT(*) FROM outbox WHERE channel = ? AND delivered IS NULL", (channel_name,)
        )
        return int(rows[0][0])

    def pending_counts(self, channels: Iterable[str] = ()) -> dict[str, int]:
        """Undelivered items per channel; every name in ``channels`` is present (0 if none)."""
        counts = {name: 0 for name in channels}
        rows = self._read(
            "SELECT channel, COUNT(*) FROM outbox WHERE delivered IS NULL GROUP BY channel", ()
        )
        counts.update({name: int(n) for name, n in rows})
        return counts

    def latest_delivered(self, channel: str | config.Channel) -> list[OutboxItem]:
        """The last delivered item of every alarm on this channel (what the receiver knows)."""
        rows = self._read(
            f"SELECT {_COLUMNS} FROM outbox WHERE id IN (SELECT MAX(id) FROM outbox"
            " WHERE channel = ? AND delivered IS NOT NULL"
            " AND (last_error IS NULL OR last_error NOT LIKE 'retired: %') GROUP BY alarm)"
            " ORDER BY id",
            (_channel_name(channel),),
        )
        return [self._item(r) for r in rows]

    def _write(self, what: str, sql: str, params: Iterable[tuple[Any, ...]]) -> None:
        try:
            with self._tx() as c:
                c.executemany(sql, params)
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot {what}: {exc}") from exc

    def mark_delivered(self, ids: Iterable[int]) -> None:
        now = self._clock()
        self._estimate.clear()  # recounted at the next bound check
        self._write(
            "mark delivered",
            "UPDATE outbox SET delivered = ?, last_error = NULL WHERE id = ?",
            [(now, i) for i in ids],
        )

    def mark_failed(self, ids: Iterable[int], next_try: float, error: str = "") -> None:
        """Count a failed attempt and keep the items queued until ``next_try``."""
        self._write(
            "mark failed",
            "UPDATE outbox SET attempts = attempts + 1, next_try = ?, last_error = ?"
            " WHERE id = ? AND delivered IS NULL",
            [(next_try, error[:500], i) for i in ids],
        )

    def prune(self, before: float) -> int:
        """Delete items delivered before ``before``; keeps the last one of every alarm per
        channel (a restart restores Alertmanager alerts from it). Returns rows deleted."""
        try:
            with self._tx() as c:
                cur = c.execute(
                    "DELETE FROM outbox WHERE delivered IS NOT NULL AND delivered < ? AND id NOT IN"
                    " (SELECT MAX(id) FROM outbox WHERE delivered IS NOT NULL"
                    " GROUP BY channel, alarm)",
                    (before,),
                )
                return cur.rowcount
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot prune: {exc}") from exc
