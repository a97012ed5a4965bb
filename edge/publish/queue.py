"""The store-and-forward queue of one publishing channel: a SQLite file in the state folder.

Records wait here until the broker has them, oldest first, and survive a restart. The
queue is bounded (``bound`` records). Beyond the bound, point and source records are thinned
oldest-first and counted (``dropped``); alarm events are never dropped while the queue is
within its bound; only when it holds nothing but alarm events and is full does the oldest
event go, counted apart (``dropped_alarms``) and logged by the caller as an error.

``put`` is one short transaction (WAL, ``synchronous=NORMAL``: a value lost to a power cut is
a value the next pass sends again; an alarm event is in the journal, ``synchronous=FULL``, in
any case). Failures raise ``StorageError`` with the path and the reason.
"""

from __future__ import annotations

import json
import os
import sqlite3
from collections.abc import Iterable
from dataclasses import dataclass

from edge.errors import StorageError
from edge.publish.content import Record

__all__ = ["Queue", "Queued"]

_ENCODER = json.JSONEncoder(separators=(",", ":"), ensure_ascii=False, allow_nan=False)

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS records (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    alarm INTEGER NOT NULL,
    queued REAL NOT NULL,
    kind TEXT NOT NULL,
    name TEXT NOT NULL,
    body TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS records_alarm_id ON records (alarm, id);
"""


@dataclass(frozen=True, slots=True)
class Queued:
    id: int
    queued: float  # seconds since the epoch, when it was put
    kind: str  # the record's type: point | source | alarm
    name: str
    body: str  # the record as JSON text

    @property
    def record(self) -> Record:
        return json.loads(self.body)  # type: ignore[no-any-return]


class Queue:
    """A bounded, durable FIFO of records."""

    def __init__(self, path: str, *, bound: int = 100_000) -> None:
        self.path = path
        self.bound = bound
        self.dropped = 0  # point/source records thinned since start
        self.dropped_alarms = 0  # alarm events dropped since start (only when full of them)
        try:
            os.makedirs(os.path.dirname(os.path.abspath(path)), exist_ok=True)
            self._db = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
            self._db.execute("PRAGMA journal_mode=WAL")
            self._db.execute("PRAGMA synchronous=NORMAL")
            self._db.executescript(_SCHEMA)
            self.size = int(self._db.execute("SELECT COUNT(*) FROM records").fetchone()[0])
        except (sqlite3.Error, OSError) as exc:
            raise self._error("cannot open", exc) from exc

    def _error(self, what: str, exc: BaseException) -> StorageError:
        reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
        return StorageError(f"publish queue {self.path}: {what}: {reason}")

    def put(self, records: Iterable[Record], now: float) -> int:
        """Append records (one transaction); thin beyond the bound. Returns how many records
        were dropped to make room."""
        dumps = _ENCODER.encode
        rows = [
            (1 if r["type"] == "alarm" else 0, now, r["type"], r["name"], dumps(r)) for r in records
        ]
        if not rows:
            return 0
        db = self._db
        try:
            db.execute("BEGIN")
            db.executemany(
                "INSERT INTO records (alarm, queued, kind, name, body) VALUES (?, ?, ?, ?, ?)",
                rows,
            )
            self.size += len(rows)
            dropped = self._thin()
            db.execute("COMMIT")
        except sqlite3.Error as exc:
            if db.in_transaction:
                db.execute("ROLLBACK")
            self.size = int(db.execute("SELECT COUNT(*) FROM records").fetchone()[0])
            raise self._error("cannot queue", exc) from exc
        return dropped

    def _thin(self) -> int:
        excess = self.size - self.bound
        if excess <= 0:
            return 0
        db = self._db
        cur = db.execute(
            "DELETE FROM records WHERE id IN "
            "(SELECT id FROM records WHERE alarm = 0 ORDER BY id LIMIT ?)",
            (excess,),
        )
        values = cur.rowcount
        self.dropped += values
        self.size -= values
        alarms = 0
        if self.size > self.bound:
            cur = db.execute(
                "DELETE FROM records WHERE id IN (SELECT id FROM records ORDER BY id LIMIT ?)",
                (self.size - self.bound,),
            )
            alarms = cur.rowcount
            self.dropped_alarms += alarms
            self.size -= alarms
        return values + alarms

    def peek(self, limit: int = 200) -> list[Queued]:
        """The oldest ``limit`` records, in order."""
        try:
            rows = self._db.execute(
                "SELECT id, queued, kind, name, body FROM records ORDER BY id LIMIT ?", (limit,)
            ).fetchall()
        except sqlite3.Error as exc:
            raise self._error("cannot read", exc) from exc
        return [Queued(*row) for row in rows]

    def remove(self, upto: int) -> None:
        """The broker has every record up to and including id ``upto``."""
        try:
            cur = self._db.execute("DELETE FROM records WHERE id <= ?", (upto,))
        except sqlite3.Error as exc:
            raise self._error("cannot remove", exc) from exc
        self.size = max(0, self.size - cur.rowcount)

    def get_meta(self, key: str, default: str | None = None) -> str | None:
        row = self._db.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
        return str(row[0]) if row else default

    def set_meta(self, key: str, value: str) -> None:
        try:
            self._db.execute(
                "INSERT INTO meta (key, value) VALUES (?, ?) "
                "ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                (key, value),
            )
        except sqlite3.Error as exc:
            raise self._error("cannot write", exc) from exc

    def close(self) -> None:
        self._db.close()
