"""The alarm journal: an append-only event log and the current state of every alarm, in
one SQLite file (WAL mode) that the notification outbox shares.

Durability: ``synchronous=FULL``. In WAL mode, NORMAL loses no data on a process crash but
may lose the last commits on power loss; an alarm event that was announced must survive a
power cut too, and alarm events are rare (a few per minute even in a flood), so the fsync
per commit is cheap. The event is committed before the notification is queued (or in the
same transaction: ``commit(..., after=outbox_enqueue)``).

Failures raise ``StorageError`` naming the path and the OS or SQLite reason (read-only
file system, full disk, not a database). Events that could not be written are never
dropped: they stay in the journal's backlog and are written first by the next successful
``commit`` (``backlog`` says how many wait); ``close`` tries once more and raises if it
cannot.
"""

from __future__ import annotations

import contextlib
import json
import os
import sqlite3
import threading
import time
from collections.abc import Callable, Iterable, Mapping
from dataclasses import replace

from edge.alarms.health import CHATTER_LOOKBACK, TOP_N, TOP_WINDOW, AlarmHealth, compute_health
from edge.alarms.state import AlarmState, stable_key
from edge.errors import StorageError
from edge.model import AlarmEvent

__all__ = ["SCHEMA_VERSION", "Journal"]

SCHEMA_VERSION = 1
DEFAULT_RETENTION = 90 * 86400.0
DEFAULT_MAX_EVENTS = 1_000_000
TOP_REFRESH = 60.0  # s: the 7-day top-10 count is the one heavy query; reuse it a minute

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS alarm_events (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    time REAL NOT NULL,
    alarm TEXT NOT NULL,
    kind TEXT NOT NULL,
    priority TEXT NOT NULL,
    value REAL,
    limit_value REAL,
    quality TEXT NOT NULL,
    user TEXT,
    comment TEXT,
    message TEXT NOT NULL,
    state TEXT NOT NULL
);
CREATE INDEX IF NOT EXISTS alarm_events_kind_time_alarm ON alarm_events (kind, time, alarm);
CREATE INDEX IF NOT EXISTS alarm_events_time ON alarm_events (time);
CREATE TABLE IF NOT EXISTS quarantine (
    id INTEGER PRIMARY KEY AUTOINCREMENT,
    time REAL NOT NULL,
    reason TEXT NOT NULL,
    data TEXT NOT NULL
);
CREATE TABLE IF NOT EXISTS alarm_states (
    name TEXT PRIMARY KEY,
    data TEXT NOT NULL,
    updated REAL
);
"""

_COLUMNS = (
    "id, time, alarm, kind, priority, value, limit_value, quality, user, comment, message, state"
)

After = Callable[[sqlite3.Connection, list[AlarmEvent]], None]


def _reason(exc: BaseException) -> str:
    if isinstance(exc, OSError):
        return exc.strerror or str(exc)
    name = getattr(exc, "sqlite_errorname", None)
    return f"{exc} ({name})" if name else str(exc)


def _error(path: str, what: str, exc: BaseException) -> StorageError:
    err = StorageError(f"alarm journal {path}: {what}: {_reason(exc)}")
    err.path = path  # type: ignore[attr-defined]
    err.reason = _reason(exc)  # type: ignore[attr-defined]
    return err


def _probe(path: str) -> None:
    """Open the file itself for writing, so the OS says plainly why it cannot be (SQLite
    would only say 'unable to open database file')."""
    parent = os.path.dirname(os.path.abspath(path))
    if not os.path.exists(parent):
        os.makedirs(parent, exist_ok=True)
    fd = os.open(path, os.O_RDWR | os.O_CREAT, 0o640)
    os.close(fd)


class Journal:
    """Use ``Journal.open``. One connection, shared with the outbox (``connection``); use
    it from one thread at a time (the service's event loop)."""

    def __init__(
        self,
        conn: sqlite3.Connection,
        path: str,
        site: str,
        retention: float,
        max_events: int,
    ) -> None:
        self._conn = conn
        self.path = path
        self.site = site
        self.retention = retention
        self.max_events = max_events
        self._lock = threading.RLock()
        self._backlog: list[AlarmEvent] = []
        self._unsaved: dict[str, AlarmState] = {}
        self._saved: dict[str, tuple[object, ...]] = {}  # stable_key of each saved state
        # the state objects last found equal to what is saved: states are frozen, and the
        # engine hands back the very same object when nothing changed, so most of 5,500
        # alarms a pass need no to_dict() to be compared
        self._seen: dict[str, AlarmState] = {}
        self._top: tuple[float, list[tuple[str, int]]] | None = None
        self.quarantined = 0  # events/states set aside since open (see ``commit``)
        self._inodes: dict[str, tuple[int, int]] = {}

    @classmethod
    def open(
        cls,
        path: str,
        *,
        site: str,
        retention: float = DEFAULT_RETENTION,
        max_events: int = DEFAULT_MAX_EVENTS,
    ) -> Journal:
        """Open (or create) the journal and prove it writable; raises StorageError."""
        try:
            _probe(path)
        except OSError as exc:
            raise _error(path, "cannot open", exc) from exc
        conn: sqlite3.Connection | None = None
        try:
            conn = sqlite3.connect(path, isolation_level=None, check_same_thread=False, timeout=10)
            mode = conn.execute("PRAGMA journal_mode=WAL").fetchone()[0]
            if str(mode).lower() != "wal":
                raise sqlite3.OperationalError(f"cannot use WAL mode (got {mode})")
            conn.execute("PRAGMA synchronous=FULL")
            conn.executescript(f"BEGIN IMMEDIATE;{_SCHEMA}COMMIT;")
        except (sqlite3.Error, OSError) as exc:
            if conn is not None:
                if conn.in_transaction:
                    conn.execute("ROLLBACK")
                conn.close()
            raise _error(path, "cannot open", exc) from exc
        journal = cls(conn, path, site, retention, max_events)
        try:
            journal._write_meta()
        except (sqlite3.Error, OSError) as exc:
            conn.close()
            raise _error(path, "cannot open", exc) from exc
        journal._saved = {n: stable_key(s) for n, s in journal.load_states().items()}
        for name in (path, path + "-wal"):
            with contextlib.suppress(OSError):
                st = os.stat(name)
                journal._inodes[name] = (st.st_dev, st.st_ino)
        return journal

    def _write_meta(self) -> None:
        c = self._conn
        if c.in_transaction:
            c.execute("COMMIT")
        c.execute("BEGIN IMMEDIATE")
        try:
            row = c.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
            if row is not None and int(row[0]) > SCHEMA_VERSION:
                raise sqlite3.DatabaseError(
                    f"written by a newer version (schema {row[0]}, this one reads {SCHEMA_VERSION})"
                )
            c.executemany(
                "INSERT INTO meta (key, value) VALUES (?, ?) "
                "ON CONFLICT(key) DO UPDATE SET value=excluded.value",
                [("schema_version", str(SCHEMA_VERSION)), ("site", self.site)],
            )
            c.execute("COMMIT")
        except BaseException:
            c.execute("ROLLBACK")
            raise

    @property
    def connection(self) -> sqlite3.Connection:
        """The shared connection (autocommit mode: ``BEGIN``/``COMMIT`` explicitly for more
        than one statement). The outbox creates its own table in it."""
        return self._conn

    @property
    def backlog(self) -> int:
        """Events waiting to be written after a failed commit."""
        return len(self._backlog)

    # --- writing -----------------------------------------------------------------------

    def commit(
        self,
        events: Iterable[AlarmEvent],
        states: Mapping[str, AlarmState] | None = None,
        *,
        after: After | None = None,
    ) -> list[AlarmEvent]:
        """Append events and save states in one transaction; returns the stored events
        (any backlog first) with ``id`` and ``key`` (``site/id``). ``after(connection,
        stored)`` runs inside the same transaction (e.g. to queue notifications).
        On a storage failure nothing is written, the events wait in the backlog, and
        StorageError is raised. An event that can never be written (its data, not the
        file, is at fault) is set aside in the ``quarantine`` table and counted
        (``quarantined``); the rest of the batch is written, so it cannot block the
        journal."""
        with self._lock:
            batch = [*self._backlog, *(_storable(e) for e in events)]
            pending = {**self._unsaved, **(states or {})}
            seen = self._seen
            stable = {n: stable_key(s) for n, s in pending.items() if seen.get(n) is not s}
            changed = {n: d for n, d in stable.items() if self._saved.get(n) != d}
            if not batch and not changed:
                seen.update(pending)
                self._check_file()  # nothing to write, but say so if it could not be
                return []
            try:
                self._check_file()
                try:
                    stored = self._write(batch, pending, changed, after, isolate=False)
                except _DATA_ERRORS:
                    stored = self._write(batch, pending, changed, after, isolate=True)
            except StorageError:
                self._backlog = batch
                self._unsaved = pending
                raise
            except (sqlite3.Error, OSError, *_DATA_ERRORS) as exc:
                self._backlog = batch
                self._unsaved = pending
                raise _error(self.path, f"cannot write {len(batch)} event(s)", exc) from exc
            except BaseException:
                self._backlog = batch
                self._unsaved = pending
                raise
            self._backlog = []
            self._unsaved = {}
            self._saved.update(changed)
            seen.update(pending)
            return stored

    def _write(
        self,
        batch: list[AlarmEvent],
        pending: Mapping[str, AlarmState],
        changed: Mapping[str, object],
        after: After | None,
        *,
        isolate: bool,
    ) -> list[AlarmEvent]:
        """One transaction. With ``isolate``, each event in its own savepoint: one that
        fails is quarantined instead of failing the batch."""
        c = self._conn
        c.execute("BEGIN IMMEDIATE")
        try:
            if isolate:
                stored = [s for s in (self._insert_or_quarantine(e) for e in batch) if s]
            else:
                stored = [self._insert(e) for e in batch]
            rows = []
            for n in changed:
                try:
                    rows.append((n, json.dumps(pending[n].to_dict()), pending[n].since))
                except _DATA_ERRORS:
                    if not isolate:
                        raise
                    self._quarantine({"state": n, "data": ascii(pending[n])}, "state")
            c.executemany(
                "INSERT INTO alarm_states (name, data, updated) VALUES (?, ?, ?) "
                "ON CONFLICT(name) DO UPDATE SET data=excluded.data, updated=excluded.updated",
                rows,
            )
            if after is not None and not isolate:
                after(c, stored)
            elif after is not None:
                for e in stored:
                    c.execute("SAVEPOINT one_after")
                    try:
                        after(c, [e])
                    except _DATA_ERRORS as exc:
                        c.execute("ROLLBACK TO one_after")
                        self._quarantine({"after": ascii(e)}, f"{type(exc).__name__}: {exc}")
                    c.execute("RELEASE one_after")
            c.execute("COMMIT")
        except BaseException:
            if c.in_transaction:
                c.execute("ROLLBACK")
            raise
        return stored

    def _insert_or_quarantine(self, e: AlarmEvent) -> AlarmEvent | None:
        c = self._conn
        c.execute("SAVEPOINT one_event")
        try:
            stored = self._insert(e)
        except _DATA_ERRORS as exc:
            c.execute("ROLLBACK TO one_event")
            c.execute("RELEASE one_event")
            self._quarantine({"event": ascii(e)}, f"{type(exc).__name__}: {exc}")
            return None
        c.execute("RELEASE one_event")
        return stored

    def _quarantine(self, data: dict[str, str], reason: str) -> None:
        self._conn.execute(
            "INSERT INTO quarantine (time, reason, data) VALUES (?, ?, ?)",
            (time.time(), ascii(reason), json.dumps(data)),
        )
        self.quarantined += 1

    def _check_file(self) -> None:
        """Raise StorageError when the file (or its WAL) under the open handle was deleted
        or replaced: SQLite would go on writing into a file nobody can open again."""
        for name, was in self._inodes.items():
            try:
                st = os.stat(name)
            except OSError as exc:
                what = f"{_what(name)} is gone under the running monitor"
                raise _error(self.path, what, exc) from exc
            if (st.st_dev, st.st_ino) != was:
                raise StorageError(
                    f"alarm journal {self.path}: {_what(name)} was replaced under the running "
                    "monitor (another file now has its name); restart to reopen it"
                )

    def check(self) -> None:
        """Raise StorageError if the file under the open handle is gone or replaced (see
        ``_check_file``); cheap (two stat calls): the service calls it every few seconds."""
        with self._lock:
            self._check_file()

    def _insert(self, e: AlarmEvent) -> AlarmEvent:
        cur = self._conn.execute(
            "INSERT INTO alarm_events (time, alarm, kind, priority, value, limit_value, "
            "quality, user, comment, message, state) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            (
                e.time,
                e.alarm,
                e.kind,
                e.priority,
                e.value,
                e.limit,
                e.quality,
                e.user,
                e.comment,
                e.message,
                e.state,
            ),
        )
        rowid = int(cur.lastrowid or 0)
        return replace(e, id=rowid, key=f"{self.site}/{rowid}")

    def append(self, events: Iterable[AlarmEvent]) -> list[AlarmEvent]:
        """Append events alone (see ``commit``)."""
        return self.commit(events)

    def save_states(self, states: Mapping[str, AlarmState]) -> None:
        """Save states alone; only those that changed (beyond value/quality) are written."""
        self.commit([], states)

    def forget_states(self, keep: Iterable[str]) -> None:
        """Delete the saved state of every alarm not in ``keep`` (after a reload)."""
        wanted = set(keep)
        with self._lock:
            names = [n for (n,) in self._conn.execute("SELECT name FROM alarm_states")]
            gone = [(n,) for n in names if n not in wanted]
            if not gone:
                return
            try:
                self._conn.executemany("DELETE FROM alarm_states WHERE name = ?", gone)
            except sqlite3.Error as exc:
                raise _error(self.path, "cannot delete states", exc) from exc
            for (n,) in gone:
                self._saved.pop(n, None)
                self._seen.pop(n, None)
                self._unsaved.pop(n, None)

    def prune(self, now: float) -> int:
        """Delete events older than the retention, then the oldest beyond ``max_events``.
        Returns how many were deleted. Ids are never reused (AUTOINCREMENT)."""
        with self._lock:
            c = self._conn
            try:
                c.execute("BEGIN IMMEDIATE")
                try:
                    n = c.execute(
                        "DELETE FROM alarm_events WHERE time < ?", (now - self.retention,)
                    ).rowcount
                    row = c.execute(
                        "SELECT id FROM alarm_events ORDER BY id DESC LIMIT 1 OFFSET ?",
                        (self.max_events,),
                    ).fetchone()
                    if row is not None:
                        n += c.execute("DELETE FROM alarm_events WHERE id <= ?", (row[0],)).rowcount
                    c.execute("COMMIT")
                except BaseException:
                    if c.in_transaction:
                        c.execute("ROLLBACK")
                    raise
            except sqlite3.Error as exc:
                raise _error(self.path, "cannot prune", exc) from exc
            return n

    # --- reading -----------------------------------------------------------------------

    def load_states(self) -> dict[str, AlarmState]:
        """Every saved alarm state, by name (with any not yet written after a failure)."""
        with self._lock:
            try:
                rows = self._conn.execute("SELECT name, data FROM alarm_states").fetchall()
            except sqlite3.Error as exc:
                raise _error(self.path, "cannot read states", exc) from exc
            out = {}
            for name, data in rows:
                try:
                    out[name] = AlarmState.from_dict(json.loads(data))
                except (ValueError, TypeError, KeyError, AttributeError) as exc:
                    raise StorageError(
                        f"alarm journal {self.path}: the saved state of alarm {name!r} is not "
                        f"readable ({type(exc).__name__}: {str(exc)[:80]}); delete that row "
                        "of alarm_states (the alarm then starts from normal) or restore the file"
                    ) from exc
            out.update(self._unsaved)
            return out

    def events(
        self,
        since_id: int = 0,
        limit: int = 100,
        *,
        from_time: float | None = None,
        alarm: str | None = None,
    ) -> list[AlarmEvent]:
        """Events with id > ``since_id``, oldest first, at most ``limit`` (1..1000); only
        those at or after ``from_time`` and of ``alarm`` when given."""
        limit = max(1, min(int(limit), 1000))
        where, params = ["id > ?"], [int(since_id)]
        if from_time is not None:
            where.append("time >= ?")
            params.append(float(from_time))  # type: ignore[arg-type]
        if alarm is not None:
            where.append("alarm = ?")
            params.append(alarm)  # type: ignore[arg-type]
        with self._lock:
            try:
                rows = self._conn.execute(
                    f"SELECT {_COLUMNS} FROM alarm_events WHERE {' AND '.join(where)} "
                    "ORDER BY id LIMIT ?",
                    (*params, limit),
                ).fetchall()
            except sqlite3.Error as exc:
                raise _error(self.path, "cannot read events", exc) from exc
        return [self._row(r) for r in rows]

    def events_between(self, since: float, until: float, limit: int = 1000) -> list[AlarmEvent]:
        """Events with ``since <= time < until``, oldest first, at most ``limit``."""
        limit = max(1, min(int(limit), 10000))
        with self._lock:
            try:
                rows = self._conn.execute(
                    f"SELECT {_COLUMNS} FROM alarm_events WHERE time >= ? AND time < ? "
                    "ORDER BY time, id LIMIT ?",
                    (float(since), float(until), limit),
                ).fetchall()
            except sqlite3.Error as exc:
                raise _error(self.path, "cannot read events", exc) from exc
        return [self._row(r) for r in rows]

    def _row(self, r: tuple) -> AlarmEvent:
        return AlarmEvent(
            id=r[0],
            key=f"{self.site}/{r[0]}",
            time=r[1],
            alarm=r[2],
            kind=r[3],
            priority=r[4],
            value=r[5],
            limit=r[6],
            quality=r[7],
            user=r[8],
            comment=r[9],
            message=r[10],
            state=r[11],
        )

    def health(
        self,
        now: float,
        states: Mapping[str, AlarmState] | None = None,
        cause_names: Iterable[str] = (),
    ) -> AlarmHealth:
        """Alarm-system health figures at ``now`` (see ``edge.alarms.health``). Give the
        running ``states`` (the monitor's, in memory): without them the saved ones are read
        back, which costs a JSON parse per alarm. ``cause_names`` are the cause alarms. The
        top-10 list (7 days) is recounted at most every ``TOP_REFRESH`` seconds."""
        with self._lock:
            try:
                recent = self._conn.execute(
                    "SELECT time, alarm FROM alarm_events "
                    "WHERE kind = 'raised' AND time > ? AND time <= ?",
                    (now - CHATTER_LOOKBACK, now),
                ).fetchall()
                if self._top is None or not 0 <= now - self._top[0] < TOP_REFRESH:
                    rows = self._conn.execute(
                        "SELECT alarm, COUNT(*) AS n FROM alarm_events "
                        "WHERE kind = 'raised' AND time > ? AND time <= ? "
                        "GROUP BY alarm ORDER BY n DESC, alarm LIMIT ?",
                        (now - TOP_WINDOW, now, TOP_N),
                    ).fetchall()
                    self._top = (now, [(a, int(n)) for a, n in rows])
            except sqlite3.Error as exc:
                raise _error(self.path, "cannot read events", exc) from exc
            top = list(self._top[1])
        if states is None:
            states = self.load_states()
        return compute_health(
            [(t, a) for t, a in recent], states, now, top=top, cause_names=cause_names
        )

    # --- closing -----------------------------------------------------------------------

    def close(self) -> None:
        """Write any backlog, then close. Raises StorageError if the backlog cannot be
        written (the events would otherwise be lost); the file is closed either way."""
        try:
            if self._backlog or self._unsaved:
                self.commit([])
        finally:
            self._conn.close()


def _what(name: str) -> str:
    return "its write-ahead log " + name if name.endswith("-wal") else "the file"


# errors of the data in a row (not of the file): retrying the same row cannot succeed
_DATA_ERRORS: tuple[type[BaseException], ...] = (
    sqlite3.InterfaceError,
    sqlite3.ProgrammingError,
    sqlite3.IntegrityError,
    sqlite3.DataError,
    ValueError,
    TypeError,
    OverflowError,
)


def _text(v: object) -> object:
    """A string SQLite can hold as UTF-8 (lone surrogates become ``\\udXXX`` escapes)."""
    if isinstance(v, str):
        try:
            v.encode("utf-8")
        except UnicodeEncodeError:
            return v.encode("utf-8", "backslashreplace").decode("utf-8")
    return v


def _number(v: object) -> object:
    if v is None or isinstance(v, float):
        return v
    try:
        return float(v)  # type: ignore[arg-type]
    except (TypeError, ValueError, OverflowError):
        return None


def _storable(e: AlarmEvent) -> AlarmEvent:
    """``e`` with text and numbers SQLite can store (a copy only when something changes)."""
    fixed = {
        k: _text(getattr(e, k))
        for k in ("alarm", "kind", "priority", "quality", "user", "comment", "message", "state")
    }
    fixed["value"] = _number(e.value)
    fixed["limit"] = _number(e.limit)
    changed = {k: v for k, v in fixed.items() if v is not getattr(e, k)}
    return replace(e, **changed) if changed else e
