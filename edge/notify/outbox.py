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
from edge.model import AlarmEvent
from edge.notify.base import OutboxItem, wants

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
        self, conn: sqlite3.Connection, *, site: str, clock: Callable[[], float] = time.time
    ) -> None:
        self._conn = conn
        self.site = site
        self._clock = clock
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
                if not wants(cfg, event):
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
        except sqlite3.Error as exc:
            raise StorageError(f"outbox: cannot queue {len(rows)} notification(s): {exc}") from exc
        for name in sorted(touched):
            for listener in self._listeners:
                listener(name)
        return added

    def _read(self, sql: str, params: tuple[Any, ...]) -> list[Any]:
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
        """Undelivered items of this channel whose next try has come, oldest first."""
        rows = self._read(
            f"SELECT {_COLUMNS} FROM outbox WHERE channel = ? AND delivered IS NULL"
            " AND next_try <= ? ORDER BY id LIMIT ?",
            (_channel_name(channel), now, limit),
        )
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
            " WHERE channel = ? AND delivered IS NOT NULL GROUP BY alarm) ORDER BY id",
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
