"""The history file: SQLite in WAL mode, beside the state file.

Tables: ``recent`` holds every frame not yet sealed into a window (one row per evaluation
pass, all series in one blob: one small transaction a second, so a SIGKILL loses at most
the last second or two); ``chunks`` holds one row per (tier, window, series) with the
window's values packed (float32, a byte of quality), keyed time first: a sealed window's
rows (one per series) go in side by side at the end of its tier, so a seal writes about
its own bytes, not a page of every series; a tier's oldest window is one range to delete.
``chunks_v1`` holds rows of the schema-1 key (tier, series, start) from before the
upgrade, read beside ``chunks`` until pruning has removed them (the upgrade renames the
table, it moves no row). ``stamps`` the pass times of each tier-0 window, shared by every
series; ``rolled`` how far each tier is complete; ``source_log`` every change of a source
between up and down.

One ``HistoryStore`` writes (the writer thread owns it); queries open their own
read-only connection (``HistoryReader``), so a long query never holds up the writer.
"""

from __future__ import annotations

import json
import math
import os
import sqlite3
from array import array
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from edge.errors import HistoryQueryError, StorageError
from edge.history.buckets import Run, Tier, choose_tier, fold, summary
from edge.history.frames import NO_SAMPLE, Frame, Layout, pack_q, pack_v, unpack_q, unpack_v

__all__ = ["HistoryReader", "HistoryStore", "Series", "SourceChange", "history_path"]

SCHEMA_VERSION = 2
NAN = float("nan")
# values of the tier below read by one slice of a roll-up (a pass a second assumed in
# tier 0; a minute interval is three): about 0.25 s of CPU, 500 series of an hour
ROLL_UP_VALUES = 1_800_000
_META = "CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL)"
_SCHEMA = """
CREATE TABLE IF NOT EXISTS series (id INTEGER PRIMARY KEY, name TEXT NOT NULL UNIQUE);
CREATE TABLE IF NOT EXISTS layouts (id INTEGER PRIMARY KEY, names TEXT NOT NULL UNIQUE);
CREATE TABLE IF NOT EXISTS recent (
    time REAL PRIMARY KEY, layout INTEGER NOT NULL, v BLOB NOT NULL, q BLOB NOT NULL);
CREATE TABLE IF NOT EXISTS stamps (start INTEGER PRIMARY KEY, t BLOB NOT NULL);
CREATE TABLE IF NOT EXISTS chunks (
    tier INTEGER NOT NULL, series INTEGER NOT NULL, start INTEGER NOT NULL,
    v BLOB NOT NULL, q BLOB NOT NULL,
    PRIMARY KEY (tier, start, series)) WITHOUT ROWID;
CREATE TABLE IF NOT EXISTS chunks_v1 (
    tier INTEGER NOT NULL, series INTEGER NOT NULL, start INTEGER NOT NULL,
    v BLOB NOT NULL, q BLOB NOT NULL,
    PRIMARY KEY (tier, series, start)) WITHOUT ROWID;
CREATE INDEX IF NOT EXISTS chunks_start ON chunks_v1 (tier, start);
CREATE TABLE IF NOT EXISTS rolled (tier INTEGER PRIMARY KEY, until INTEGER NOT NULL);
CREATE TABLE IF NOT EXISTS source_log (
    time REAL NOT NULL, source TEXT NOT NULL, up INTEGER NOT NULL, detail TEXT);
CREATE INDEX IF NOT EXISTS source_log_time ON source_log (time);
"""


def history_path(state_path: str, configured: str | None) -> str:
    """``configured``, or ``<state stem>.history.sqlite`` in the state file's folder."""
    if configured:
        return configured
    p = Path(state_path)
    return str(p.with_name(p.stem + ".history.sqlite"))


@dataclass(frozen=True, slots=True)
class SourceChange:
    time: float
    source: str
    up: bool
    detail: str | None


@dataclass(slots=True)
class Series:
    """One answered series: the tier it came from, the step and its samples."""

    name: str
    tier: Tier
    step: float  # s between samples; 0 for every pass
    run: Run
    aggregated: bool


def _storage_error(path: str, what: str, exc: BaseException) -> StorageError:
    return StorageError(f"{path}: {what}: {exc}")


def _connect(path: str, readonly: bool) -> sqlite3.Connection:
    if readonly:
        uri = Path(path).resolve().as_uri() + "?mode=ro"
        conn = sqlite3.connect(uri, uri=True, isolation_level=None, timeout=5)
        conn.execute("PRAGMA query_only=1")
        return conn
    conn = sqlite3.connect(path, isolation_level=None, check_same_thread=False, timeout=10)
    # both only take on a new file: 16 KiB pages keep a day's 10-minute chunk (1.9 kB) in
    # its b-tree page (4 KiB pages would spill each into an overflow page of its own)
    conn.execute("PRAGMA page_size=16384")
    conn.execute("PRAGMA auto_vacuum=INCREMENTAL")
    mode = conn.execute("PRAGMA journal_mode=WAL").fetchone()[0]
    if str(mode).lower() != "wal":
        conn.close()
        raise sqlite3.OperationalError(f"cannot use WAL mode (got {mode})")
    # NORMAL in WAL: a committed frame survives a killed process; a power cut may lose
    # the last commits, never the file
    conn.execute("PRAGMA synchronous=NORMAL")
    return conn


def _series_major(conn: sqlite3.Connection, table: str) -> bool:
    """Whether ``table`` exists keyed by (tier, series, start), the schema-1 key."""
    pk = {r[1]: r[5] for r in conn.execute(f"PRAGMA table_info({table})")}
    return bool(pk) and 0 < pk.get("series", 0) < pk.get("start", 0)


def _chunk_tables(conn: sqlite3.Connection) -> tuple[str | None, str | None]:
    """The table of time-major rows and the table of schema-1 rows (None when empty)."""
    if _series_major(conn, "chunks"):  # a schema-1 file, not upgraded yet
        return None, "chunks"
    found = conn.execute(
        "SELECT name FROM sqlite_schema WHERE type='table' AND name IN ('chunks', 'chunks_v1')"
    ).fetchall()
    names = {r[0] for r in found}
    old = "chunks_v1" if "chunks_v1" in names else None
    if old is not None and conn.execute("SELECT 1 FROM chunks_v1 LIMIT 1").fetchone() is None:
        old = None
    return ("chunks" if "chunks" in names else None), old


def _windows_sql(table: str) -> str:
    """The starts of a tier's windows in [?2, ?3) (tier ?1), one index probe each."""
    return (
        "WITH RECURSIVE w(s) AS ("
        f"SELECT (SELECT MIN(start) FROM {table} WHERE tier=?1 AND start>=?2 AND start<?3) "
        f"UNION ALL SELECT (SELECT MIN(start) FROM {table} WHERE tier=?1 AND start>w.s "
        "AND start<?3) FROM w WHERE w.s IS NOT NULL) "
    )


def _chunk_run(tier: Tier, start: int, v: bytes, q: bytes, stamps: bytes | None) -> Run | None:
    """The samples of one stored row (``stamps``: its window's pass times, tier 0); None
    for a tier-0 row that cannot be placed in time (its stamps missing or not its own)."""
    if tier.index == 0:
        t = array("d")
        t.frombytes(stamps or b"")
        values = unpack_v(v).tolist()
        if len(values) != len(t):
            return None
        qs = unpack_q(q, len(values))
        times = t.tolist()
        if NO_SAMPLE in qs:  # passes this series was not in (a reload mid-window)
            keep = [i for i, x in enumerate(qs) if x != NO_SAMPLE]
            times = [times[i] for i in keep]
            values = [values[i] for i in keep]
            qs = bytes(qs[i] for i in keep)
        return Run(times, values, values, values, bytearray(qs))
    n = int(tier.window / tier.step)
    a = unpack_v(v).tolist()
    qs = unpack_q(q, n)
    times = [start + i * tier.step for i in range(n)]
    run = Run(times, a[:n], a[n : 2 * n], a[2 * n :], bytearray(qs))
    keep = [i for i in range(n) if qs[i] != NO_SAMPLE]
    if len(keep) != n:
        run = Run(
            [run.times[i] for i in keep],
            [run.mins[i] for i in keep],
            [run.means[i] for i in keep],
            [run.maxs[i] for i in keep],
            bytearray(qs[i] for i in keep),
        )
    return run


def _upgrade(conn: sqlite3.Connection) -> None:
    """Make the tables of this schema in one transaction; a file of schema 1 has its
    ``chunks`` (keyed by series first) renamed ``chunks_v1``, a change of the schema
    text only, and a new time-major ``chunks``. A newer schema is refused untouched.

    Every file has ``chunks_v1`` and its index ``chunks_start``: the schema-1 code, which
    makes its tables before it reads the version, then finds all its names taken and
    refuses the file without adding an index to the time-major table."""
    conn.execute("BEGIN IMMEDIATE")
    conn.execute(_META)
    row = conn.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()
    if row is not None and int(row[0]) > SCHEMA_VERSION:
        raise sqlite3.DatabaseError(
            f"written by a newer version (schema {row[0]}, this one reads {SCHEMA_VERSION})"
        )
    if _series_major(conn, "chunks"):
        conn.execute("ALTER TABLE chunks RENAME TO chunks_v1")
    for statement in _SCHEMA.split(";"):
        if statement.strip():
            conn.execute(statement)
    conn.execute(
        "INSERT OR REPLACE INTO meta (key, value) VALUES ('schema_version', ?)",
        (str(SCHEMA_VERSION),),
    )
    conn.execute("COMMIT")


class _Base:
    def __init__(self, conn: sqlite3.Connection, path: str, ladder: Sequence[Tier]) -> None:
        self._conn = conn
        self.path = path
        self.ladder = tuple(ladder)
        self._layouts: dict[int, tuple[str, ...]] = {}
        # the time-major table (None in a schema-1 file read before its upgrade) and the
        # table of schema-1 rows, while it holds any
        self._chunks, self._old = _chunk_tables(conn)

    def close(self) -> None:
        self._conn.close()

    def _layout_names(self, layout_id: int) -> tuple[str, ...]:
        names = self._layouts.get(layout_id)
        if names is None:
            row = self._conn.execute("SELECT names FROM layouts WHERE id=?", (layout_id,))
            found = row.fetchone()
            names = tuple(json.loads(found[0])) if found else ()
            self._layouts[layout_id] = names
        return names

    def rolled_until(self) -> dict[int, int]:
        return dict(self._conn.execute("SELECT tier, until FROM rolled").fetchall())

    # --- reading ---------------------------------------------------------------------

    def series_id(self, name: str) -> int | None:
        row = self._conn.execute("SELECT id FROM series WHERE name=?", (name,)).fetchone()
        return int(row[0]) if row else None

    def series_names(self) -> list[str]:
        return [r[0] for r in self._conn.execute("SELECT name FROM series ORDER BY name")]

    def _tier_rows(
        self, tier: Tier, sid: int, first: int, until: float
    ) -> list[tuple[int, bytes | None, bytes, bytes]]:
        """Stored rows (start, stamps, v, q) of one series in one tier with a start in
        [first, until), from both tables, by start: one lookup per window. Stamps are
        those of tier 0 (None above it); a tier-0 row without stamps is left out."""
        c = self._conn
        found: dict[int, tuple[int, bytes | None, bytes, bytes]] = {}
        tables = [t for t in (self._old, self._chunks) if t is not None]
        for table in tables:  # the time-major table last: its row wins a start in both
            if tier.index == 0:
                rows = c.execute(
                    f"SELECT s.start, s.t, c.v, c.q FROM stamps s CROSS JOIN {table} c "
                    "ON c.tier=0 AND c.start=s.start AND c.series=? "
                    "WHERE s.start>=? AND s.start<? ORDER BY s.start",
                    (sid, first, until),
                )
            elif table == self._chunks:
                rows = c.execute(
                    _windows_sql(table) + f"SELECT c.start, NULL, c.v, c.q FROM w CROSS JOIN "
                    f"{table} c ON c.tier=?1 AND c.start=w.s AND c.series=?4 ORDER BY c.start",
                    (tier.index, first, until, sid),
                )
            else:
                rows = c.execute(
                    f"SELECT start, NULL, v, q FROM {table} WHERE tier=? AND series=? "
                    "AND start>=? AND start<? ORDER BY start",
                    (tier.index, sid, first, until),
                )
            if len(tables) == 1:
                return rows.fetchall()
            for row in rows:
                found[row[0]] = row
        return [found[k] for k in sorted(found)]

    def _tier_run(self, tier: Tier, sid: int, since: float, until: float) -> Run:
        """Stored samples of one series in one tier, in [since, until)."""
        first = math.floor(since / tier.window) * tier.window
        out = Run.empty()
        for start, stamps, v, q in self._tier_rows(tier, sid, first, until):
            run = _chunk_run(tier, start, v, q, stamps)
            if run is not None:
                out.extend(run)
        return out.between(since, until)

    def _recent_run(self, name: str, since: float, until: float) -> Run:
        """Samples of one series from frames not yet sealed into a window."""
        rows = self._conn.execute(
            "SELECT time, layout, v, q FROM recent WHERE time>=? AND time<? ORDER BY time",
            (since, until),
        ).fetchall()
        out = Run.empty()
        for time, layout, v, q in rows:
            names = self._layout_names(layout)
            try:
                i = names.index(name)
            except ValueError:
                continue
            value = unpack_v(v[4 * i : 4 * i + 4])[0]
            quality = q[i]
            if quality == NO_SAMPLE:
                continue
            out.times.append(time)
            out.mins.append(value)
            out.means.append(value)
            out.maxs.append(value)
            out.quality.append(quality)
        return out

    def _collect(self, tier: Tier, sid: int, name: str, since: float, until: float) -> Run:
        """Samples of ``tier``, and where it is not complete yet, of the finer tiers."""
        if tier.index == 0:
            run = self._tier_run(tier, sid, since, until)
            done = self.rolled_until().get(0, 0)
            run = run.between(since, min(until, done)) if done else Run.empty()
            run.extend(self._recent_run(name, max(since, done), until))
            return run
        done = self.rolled_until().get(tier.index, 0)
        run = self._tier_run(tier, sid, since, min(until, done)) if done > since else Run.empty()
        if done < until:
            finer = self.ladder[tier.index - 1]
            run.extend(self._collect(finer, sid, name, max(since, done), until))
        return run

    def query(
        self, name: str, since: float, until: float, step: float | None, now: float
    ) -> Series:
        """One series in [since, until). Without ``step``, the stored resolution of the
        tier chosen for a span of about 1000 samples; with one, folded to that step."""
        if until <= since:
            raise HistoryQueryError("until must be later than since")
        sid = self.series_id(name)
        if sid is None:
            raise HistoryQueryError(f"no history for {name!r}")
        wanted = step if step is not None else (until - since) / 1000.0
        tier = choose_tier(self.ladder, since, now, wanted)
        run = self._collect(tier, sid, name, since, until)
        # folded to the step asked for, or to the tier's own (its tail may come from a
        # finer tier that is not made into it yet)
        every = step if step is not None and step > 1.0 else tier.step
        if every > 0:
            start = math.floor(since / every) * every
            n = math.ceil((until - start) / every)
            run = fold(run, start, every, n, keep_empty=False).between(since - every, until)
            return Series(name, tier, every, run, True)
        return Series(name, tier, 0.0, run, False)

    def source_changes(self, since: float, until: float) -> list[SourceChange]:
        """Each source's state at ``since`` (its last change before), then every change."""
        before = self._conn.execute(
            "SELECT s.time, s.source, s.up, s.detail FROM source_log s JOIN "
            "(SELECT source, MAX(time) AS t FROM source_log WHERE time<? GROUP BY source) m "
            "ON s.source=m.source AND s.time=m.t",
            (since,),
        ).fetchall()
        during = self._conn.execute(
            "SELECT time, source, up, detail FROM source_log WHERE time>=? AND time<? "
            "ORDER BY time LIMIT 10000",
            (since, until),
        ).fetchall()
        return [SourceChange(r[0], r[1], bool(r[2]), r[3]) for r in [*before, *during]]

    def used_bytes(self) -> int:
        c = self._conn
        pages = c.execute("PRAGMA page_count").fetchone()[0]
        free = c.execute("PRAGMA freelist_count").fetchone()[0]
        size = c.execute("PRAGMA page_size").fetchone()[0]
        return int((pages - free) * size)

    def value_count(self) -> int:
        """Values stored in windows (every series' sample counts once; min/mean/max as one)."""
        total = 0
        tables = [t for t in (self._chunks, self._old) if t is not None]
        for tier in self.ladder:
            rows = sum(
                self._conn.execute(
                    f"SELECT COUNT(*) FROM {t} WHERE tier=?", (tier.index,)
                ).fetchone()[0]
                for t in tables
            )
            if tier.index == 0:
                per = self._conn.execute("SELECT AVG(LENGTH(t)) / 8.0 FROM stamps").fetchone()[0]
                total += int(rows * (per or 0))
            else:
                total += int(rows * tier.window / tier.step)
        return total


class HistoryReader(_Base):
    """A read-only view of a history file (the API's queries, ``steam-edge history``)."""

    @classmethod
    def open(cls, path: str, ladder: Sequence[Tier]) -> HistoryReader:
        if not os.path.exists(path):
            raise StorageError(f"{path}: no history file here")
        try:
            return cls(_connect(path, readonly=True), path, ladder)
        except sqlite3.Error as exc:
            raise _storage_error(path, "cannot open", exc) from exc


class HistoryStore(_Base):
    """The writing side. Use from one thread (the writer's)."""

    def __init__(self, conn: sqlite3.Connection, path: str, ladder: Sequence[Tier]) -> None:
        super().__init__(conn, path, ladder)
        self._layout_ids: dict[tuple[str, ...], int] = {}
        self._layout_sids: dict[int, list[int]] = {}  # series ids in a layout's order
        self._layout_order: dict[int, list[int]] = {}  # a layout's positions by series id
        self._rolling: dict[int, tuple[int, int]] = {}  # tier: (window start, next series)
        self._last_layout: tuple[Layout, int] | None = None  # the frames' usual layout
        self._series_ids: dict[str, int] = {}
        rolled = self.rolled_until()
        self.sealed_until = float(rolled.get(0, 0))
        self.frames_dropped = 0

    @classmethod
    def open(cls, path: str, ladder: Sequence[Tier]) -> HistoryStore:
        """Open (or create) the history file; raises StorageError."""
        folder = os.path.dirname(os.path.abspath(path))
        try:
            os.makedirs(folder, exist_ok=True)
            os.close(os.open(path, os.O_RDWR | os.O_CREAT, 0o640))  # the OS says why not
            conn = _connect(path, readonly=False)
        except (OSError, sqlite3.Error) as exc:
            raise _storage_error(path, "cannot open", exc) from exc
        try:
            _upgrade(conn)
        except sqlite3.Error as exc:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            conn.close()
            raise _storage_error(path, "cannot open", exc) from exc
        return cls(conn, path, ladder)

    # --- writing ---------------------------------------------------------------------

    def _ids(self, names: Iterable[str]) -> list[int]:
        """The series id of each name, a name new to the file added (in order, as one
        executemany and one read back: a layout of 30,000 names at start-up)."""
        names = list(names)
        known = self._series_ids
        new = [n for n in dict.fromkeys(names) if n not in known]
        if new:
            c = self._conn
            c.executemany("INSERT OR IGNORE INTO series (name) VALUES (?)", [(n,) for n in new])
            wanted = set(new)
            for sid, name in c.execute("SELECT id, name FROM series"):
                if name in wanted:
                    known[name] = int(sid)
        return [known[n] for n in names]

    def _layout_id(self, names: tuple[str, ...]) -> int:
        lid = self._layout_ids.get(names)
        if lid is None:
            text = json.dumps(names, separators=(",", ":"))
            self._conn.execute("INSERT OR IGNORE INTO layouts (names) VALUES (?)", (text,))
            lid = int(
                self._conn.execute("SELECT id FROM layouts WHERE names=?", (text,)).fetchone()[0]
            )
            self._layout_ids[names] = lid
            self._layouts[lid] = names
            self._layout_sids[lid] = self._ids(names)
        return lid

    def _layout_series(self, layout_id: int, names: tuple[str, ...]) -> list[int]:
        """The series ids of a layout's names, in order (made once per layout)."""
        sids = self._layout_sids.get(layout_id)
        if sids is None:
            sids = self._layout_sids[layout_id] = self._ids(names)
        return sids

    def write(self, frames: Sequence[Frame], changes: Sequence[SourceChange] = ()) -> int:
        """Frames and source changes in one transaction; returns the frames kept (a frame
        older than the last sealed window, after the clock went back, is dropped)."""
        c = self._conn
        try:
            c.execute("BEGIN IMMEDIATE")
            kept = 0
            for f in frames:
                if f.time < self.sealed_until:
                    self.frames_dropped += 1
                    continue
                last = self._last_layout
                if last is not None and last[0] is f.layout:
                    lid = last[1]
                else:
                    lid = self._layout_id(f.layout.names)
                    self._last_layout = (f.layout, lid)
                c.execute(
                    "INSERT OR REPLACE INTO recent (time, layout, v, q) VALUES (?, ?, ?, ?)",
                    (f.time, lid, f.values, f.quality),
                )
                kept += 1
            c.executemany(
                "INSERT INTO source_log (time, source, up, detail) VALUES (?, ?, ?, ?)",
                [(s.time, s.source, int(s.up), s.detail) for s in changes],
            )
            c.execute("COMMIT")
        except sqlite3.Error as exc:
            if c.in_transaction:
                c.execute("ROLLBACK")
            raise _storage_error(self.path, "cannot write", exc) from exc
        return kept

    def seal(self, before: float) -> int:
        """Pack every complete tier-0 window that ends at or before ``before`` (the time of
        the newest frame); returns the windows sealed."""
        tier = self.ladder[0]
        row = self._conn.execute("SELECT MIN(time) FROM recent").fetchone()
        if row[0] is None:
            return 0
        sealed = 0
        start = math.floor(row[0] / tier.window) * tier.window
        while start + tier.window <= before:
            self._seal_window(start, start + tier.window)
            sealed += 1
            nxt = self._conn.execute("SELECT MIN(time) FROM recent").fetchone()[0]
            if nxt is None:
                break
            start = math.floor(nxt / tier.window) * tier.window
        return sealed

    def _seal_window(self, start: int, end: int) -> None:
        c = self._conn
        try:
            c.execute("BEGIN IMMEDIATE")  # a series new to the file is added in it
            heads = c.execute(
                "SELECT time, layout, length(v), length(q) FROM recent WHERE time<? ORDER BY time",
                (end,),
            ).fetchall()
            times = array("d", (r[0] for r in heads))
            chunks = self._one_layout_chunks(heads, start, end)
            if chunks is None:
                rows = c.execute(
                    "SELECT time, layout, v, q FROM recent WHERE time<? ORDER BY time", (end,)
                ).fetchall()
                chunks = self._mixed_chunks(rows, start)
                del rows
            c.executemany(
                "INSERT OR REPLACE INTO chunks (tier, series, start, v, q) VALUES (0, ?, ?, ?, ?)",
                chunks,
            )
            c.execute(
                "INSERT OR REPLACE INTO stamps (start, t) VALUES (?, ?)", (start, times.tobytes())
            )
            c.execute("DELETE FROM recent WHERE time<?", (end,))
            c.execute("INSERT OR REPLACE INTO rolled (tier, until) VALUES (0, ?)", (end,))
            c.execute("COMMIT")
        except sqlite3.Error as exc:
            if c.in_transaction:
                c.execute("ROLLBACK")
            raise _storage_error(self.path, "cannot seal a window", exc) from exc
        self.sealed_until = float(end)

    def _one_layout_chunks(
        self, heads: list[Any], start: int, end: int
    ) -> Iterator[tuple[int, int, bytes, bytes]] | None:
        """The usual case, one config all window long: the frames' blobs copied one by
        one into a window-sized buffer (no list of every frame's blobs) and each series'
        column cut out by strided slices in C (float32 bits as they are). None when the
        frames (``heads``: time, layout, blob lengths) are not all of one layout."""
        n = len(heads)
        if not n or any(r[1] != heads[0][1] for r in heads):
            return None
        lid = heads[0][1]
        names = self._layout_names(lid)
        m = len(names)
        if any(r[2] != 4 * m or r[3] != m for r in heads):
            return None
        values = bytearray(4 * n * m)
        quality = bytearray(n * m)
        cursor = self._conn.execute("SELECT v, q FROM recent WHERE time<? ORDER BY time", (end,))
        for k, (v, q) in enumerate(cursor):
            values[4 * m * k : 4 * m * (k + 1)] = v
            quality[m * k : m * (k + 1)] = q
        sids = self._layout_series(lid, names)
        order = self._layout_order.get(lid)
        if order is None:  # rows in id order: one run of appends at the tier's end
            order = self._layout_order[lid] = sorted(range(m), key=sids.__getitem__)
        words = memoryview(values).cast("I")

        def chunks() -> Iterator[tuple[int, int, bytes, bytes]]:
            for i in order:
                qs = quality[i::m]
                if qs.count(NO_SAMPLE) != n:
                    yield sids[i], start, words[i::m].tobytes(), pack_q(qs, n)

        return chunks()

    def _mixed_chunks(self, rows: list[Any], start: int) -> list[tuple[int, int, bytes, bytes]]:
        """Frames of more than one layout (a reload mid-window): series by series."""
        columns: dict[str, tuple[Any, Any]] = {}
        n = len(rows)
        for k, (_, layout, v, q) in enumerate(rows):
            names = self._layout_names(layout)
            values = unpack_v(v)
            for i, name in enumerate(names):
                col = columns.get(name)
                if col is None:
                    col = columns[name] = ([NAN] * n, bytearray([NO_SAMPLE]) * n)
                col[0][k] = values[i]
                col[1][k] = q[i]
        ids = dict(zip(columns, self._ids(columns), strict=True))
        rows = [
            (ids[name], start, pack_v(vals), pack_q(qs, n))
            for name, (vals, qs) in columns.items()
            if qs.count(NO_SAMPLE) != n
        ]
        rows.sort(key=lambda r: r[0])
        return rows

    def _first_start(self, tier_index: int, since: int | None = None) -> int | None:
        """The earliest window start of a tier (at or after ``since``), in either table."""
        found = []
        for table in (self._chunks, self._old):
            if table is None:
                continue
            if since is None:
                sql, args = f"SELECT MIN(start) FROM {table} WHERE tier=?", (tier_index,)
            else:
                sql = f"SELECT MIN(start) FROM {table} WHERE tier=? AND start>=?"
                args = (tier_index, since)
            first = self._conn.execute(sql, args).fetchone()[0]
            if first is not None:
                found.append(int(first))
        return min(found) if found else None

    def roll_up(self, index: int) -> bool:
        """Make one window of tier ``index`` from the tier below, if it is complete
        there; returns True when a window was made (call again for the next). Made slice
        by slice as ``roll_up_part`` makes it."""
        while True:
            state, more = self._roll_step(index)
            if state != "part":
                return more

    def roll_up_part(self, index: int) -> bool:
        """One bounded step of ``roll_up``: the next window of tier ``index`` for a slice
        of the series (about ``ROLL_UP_VALUES`` values of the tier below read window
        by window, written in a transaction of its own), or a skip over time without data.
        The window counts as made (``rolled``) with its last slice, so a query or a crash
        between slices sees none of it. Returns True when there is more to do."""
        state, more = self._roll_step(index)
        return state == "part" or more

    def _roll_step(self, index: int) -> tuple[str, bool]:
        tier, below = self.ladder[index], self.ladder[index - 1]
        rolled = self.rolled_until()
        ready = rolled.get(below.index, 0)
        start = rolled.get(index)
        c = self._conn
        if start is None:
            first = self._first_start(below.index)
            if first is None:
                return "idle", False
            start = math.floor(first / tier.window) * tier.window
        end = start + tier.window
        if end > ready:
            return "idle", False
        nxt = self._first_start(below.index, start)
        if nxt is None or nxt >= end:  # nothing there: skip ahead to the next data
            skip = end if nxt is None else math.floor(nxt / tier.window) * tier.window
            c.execute("INSERT OR REPLACE INTO rolled (tier, until) VALUES (?, ?)", (index, skip))
            self._rolling.pop(index, None)
            return "skip", skip + tier.window <= ready
        n = int(tier.window / tier.step)
        last = c.execute("SELECT MAX(id) FROM series").fetchone()[0] or 0
        resume = self._rolling.get(index)
        if resume is not None and resume[0] == start:
            first_sid = resume[1]
        else:  # after a restart: on from the slices already written
            made = c.execute(
                "SELECT MAX(series) FROM chunks WHERE tier=? AND start=?", (index, start)
            ).fetchone()[0]
            first_sid = 0 if made is None else int(made) + 1
        per_row = below.window if below.index == 0 else 3 * below.window / below.step
        per = max(1, int(ROLL_UP_VALUES / (per_row * tier.window / below.window)))
        sids = (first_sid, first_sid + per)
        if below.index == 0 and tier.step == below.window:
            rows = self._windows_summed(tier, start, end, n, sids)
        else:
            rows = self._windows_folded(below, tier, start, end, n, sids)
        complete = sids[1] > last
        try:
            c.execute("BEGIN IMMEDIATE")
            c.executemany(
                "INSERT OR REPLACE INTO chunks (tier, series, start, v, q) VALUES (?, ?, ?, ?, ?)",
                [(index, *r) for r in rows],
            )
            if complete:
                c.execute("INSERT OR REPLACE INTO rolled (tier, until) VALUES (?, ?)", (index, end))
            c.execute("COMMIT")
        except sqlite3.Error as exc:
            if c.in_transaction:
                c.execute("ROLLBACK")
            raise _storage_error(self.path, "cannot roll up", exc) from exc
        if complete:
            self._rolling.pop(index, None)
            return "made", True
        self._rolling[index] = (start, sids[1])
        return "part", True

    def _slice_rows(
        self, tier_index: int, start: int, end: int, sids: tuple[int, int]
    ) -> Iterator[tuple[int, int, bytes, bytes]]:
        """Rows (series, start, v, q) of a tier with a start in [start, end) and a series
        id in [sids): schema-1 rows first (a lookup per series), then the time-major
        ones window by window (one range each), streamed."""
        c = self._conn
        if self._old is not None:
            ids = c.execute("SELECT id FROM series WHERE id>=? AND id<?", sids).fetchall()
            for (sid,) in ids:
                for s0, v, q in c.execute(
                    f"SELECT start, v, q FROM {self._old} WHERE tier=? AND series=? "
                    "AND start>=? AND start<?",
                    (tier_index, sid, start, end),
                ):
                    yield sid, s0, v, q
        if self._chunks is None:
            return
        windows = c.execute(
            _windows_sql(self._chunks) + "SELECT s FROM w WHERE s IS NOT NULL",
            (tier_index, start, end),
        ).fetchall()
        for (s0,) in windows:
            for sid, v, q in c.execute(
                f"SELECT series, v, q FROM {self._chunks} WHERE tier=? AND start=? "
                "AND series>=? AND series<?",
                (tier_index, s0, *sids),
            ):
                yield sid, s0, v, q

    def _folded(
        self, below: Tier, tier: Tier, sid: int, start: int, end: int, n: int
    ) -> tuple[int, int, bytes, bytes]:
        """One series' window of ``tier`` folded from its samples in ``below``."""
        folded = fold(self._tier_run(below, sid, start, end), start, tier.step, n)
        v = pack_v([*folded.mins, *folded.means, *folded.maxs])
        return sid, start, v, pack_q(folded.quality, n)

    def _packed(
        self,
        below: Tier,
        tier: Tier,
        start: int,
        end: int,
        n: int,
        made: dict[int, tuple[array[float], array[float], array[float], bytearray]],
        general: set[int],
    ) -> list[tuple[int, int, bytes, bytes]]:
        """The rows of a slice in series order: the intervals made, and the series that
        need the general fold folded."""
        rows = []
        for sid in sorted(made.keys() | general):
            if sid in general:
                rows.append(self._folded(below, tier, sid, start, end, n))
            else:
                mins, means, maxs, quality = made[sid]
                rows.append((sid, start, pack_v([*mins, *means, *maxs]), pack_q(quality, n)))
        return rows

    def _windows_summed(
        self, tier: Tier, start: int, end: int, n: int, sids: tuple[int, int]
    ) -> list[tuple[int, int, bytes, bytes]]:
        """A window of ``tier`` for the series in [sids) when each of its intervals is
        one tier-0 window (1-minute intervals of 1-minute windows): each chunk below is
        summed as it is (``summary``, the rule of ``fold``) instead of going through runs
        of every sample. A series with a window whose pass times stray out of it (not
        written by ``seal``) is folded the general way."""
        c = self._conn
        below = self.ladder[0]
        stamps = dict(
            c.execute("SELECT start, t FROM stamps WHERE start>=? AND start<?", (start, end))
        )
        placed: dict[int, int] = {}  # passes of a window whose times are all within it
        for s0, blob in stamps.items():
            t = array("d")
            t.frombytes(blob)
            within = t and s0 % below.window == 0 and s0 <= t[0] and t[-1] < s0 + below.window
            if within and list(t) == sorted(t):
                placed[s0] = len(t)
        made: dict[int, tuple[array[float], array[float], array[float], bytearray]] = {}
        general: set[int] = set()
        step = int(tier.step)
        empty = array("d", [NAN]) * n
        for sid, s0, v, q in self._slice_rows(0, start, end, sids):
            if sid in general:
                continue
            col = made.get(sid)
            if col is None:
                col = made[sid] = _new_column(empty, n)
            values = unpack_v(v).tolist()  # min/max/fsum of a list: no float made per value
            count = len(values)
            if count != placed.get(s0, -1):
                if stamps.get(s0) is not None and len(stamps[s0]) == 8 * count:
                    general.add(sid)  # times out of the window: fold this series
                continue  # a window without its stamps cannot be placed in time
            qs = unpack_q(q, count)
            if NO_SAMPLE in qs:  # passes this series was not in (a reload mid-window)
                keep = [i for i, x in enumerate(qs) if x != NO_SAMPLE]
                values = [values[i] for i in keep]
                qs = bytes(qs[i] for i in keep)
            if not qs:
                continue
            mins, means, maxs, quality = col
            i = (s0 - start) // step
            if len(qs) == 1 and qs[0] == 2:
                mins[i] = means[i] = maxs[i] = values[0]
                quality[i] = 2
            else:
                mins[i], means[i], maxs[i], quality[i] = summary(values, values, values, qs)
        return self._packed(below, tier, start, end, n, made, general)

    def _windows_folded(
        self, below: Tier, tier: Tier, start: int, end: int, n: int, sids: tuple[int, int]
    ) -> list[tuple[int, int, bytes, bytes]]:
        """A window of ``tier`` for the series in [sids) from a coarser tier below, each
        row below folded on its own into the intervals it covers (``fold``, as the whole
        run would be: no interval takes samples of two rows). A row that does not cover
        whole intervals, or rows of tier 0, have their series folded the general way."""
        made: dict[int, tuple[array[float], array[float], array[float], bytearray]] = {}
        general: set[int] = set()
        step = tier.step
        k = int(below.window // step)
        whole = below.index > 0 and below.window % step == 0
        m = int(below.window / below.step) if whole else 0  # samples in a row below
        r = int(step / below.step) if whole and step % below.step == 0 else 0  # an interval's
        empty = array("d", [NAN]) * n
        for sid, s0, v, q in self._slice_rows(below.index, start, end, sids):
            if sid in general:
                continue
            offset = s0 - start
            if not whole or offset % step or s0 + below.window > end:
                general.add(sid)
                continue
            col = made.get(sid)
            if col is None:
                col = made[sid] = _new_column(empty, n)
            i0 = int(offset // step)
            mins, means, maxs, quality = col
            if q == b"\x02" and r:  # all good, every sample there: ``summary`` of each r
                a = unpack_v(v).tolist()
                for j in range(k):
                    lo, hi = j * r, (j + 1) * r
                    mins[i0 + j] = min(a[lo:hi])
                    means[i0 + j] = math.fsum(a[m + lo : m + hi]) / r
                    maxs[i0 + j] = max(a[2 * m + lo : 2 * m + hi])
                quality[i0 : i0 + k] = b"\x02" * k
                continue
            run = _chunk_run(below, s0, v, q, None)
            assert run is not None
            part = fold(run, s0, step, k)
            mins[i0 : i0 + k] = array("d", part.mins)
            means[i0 : i0 + k] = array("d", part.means)
            maxs[i0 : i0 + k] = array("d", part.maxs)
            quality[i0 : i0 + k] = part.quality
        return self._packed(below, tier, start, end, n, made, general)

    def prune(self, now: float, max_bytes: int) -> int:
        """One small step: drop the oldest window of a tier past its age (once the tier
        above holds it), or, beyond ``max_bytes``, of the tier oldest for its keep. Returns
        the rows deleted (0 when nothing was due)."""
        c = self._conn
        rolled = self.rolled_until()
        oldest: dict[int, int] = {}
        for tier in self.ladder:
            first = self._first_start(tier.index)
            if first is not None:
                oldest[tier.index] = first
        victim: tuple[int, int] | None = None
        for tier in self.ladder:
            first = oldest.get(tier.index)
            if first is None or first + tier.window > now - tier.keep:
                continue
            above = tier.index + 1
            if above < len(self.ladder) and rolled.get(above, 0) < first + tier.window:
                continue  # not yet made into the coarser tier
            victim = (tier.index, first)
            break
        if victim is None and oldest and self.used_bytes() > max_bytes:

            def age(i: int) -> float:
                return (now - oldest[i]) / self.ladder[i].keep

            i = max(oldest, key=age)
            victim = (i, oldest[i])
        if victim is None:
            return 0
        tier_index, start = victim
        try:
            c.execute("BEGIN IMMEDIATE")
            deleted = 0
            for table in (self._chunks, self._old):
                if table is not None:
                    deleted += c.execute(
                        f"DELETE FROM {table} WHERE tier=? AND start=?", (tier_index, start)
                    ).rowcount
            if tier_index == 0:
                c.execute("DELETE FROM stamps WHERE start<=?", (start,))
            c.execute("DELETE FROM source_log WHERE time<?", (now - self.ladder[-1].keep,))
            c.execute("COMMIT")
            c.execute("PRAGMA incremental_vacuum(4000)")
            if (
                self._old is not None
                and c.execute(f"SELECT 1 FROM {self._old} LIMIT 1").fetchone() is None
            ):
                self._old = None  # every schema-1 row pruned: that table is read no more
        except sqlite3.Error as exc:
            if c.in_transaction:
                c.execute("ROLLBACK")
            raise _storage_error(self.path, "cannot prune", exc) from exc
        return int(deleted)


def _new_column(
    empty: array[float], n: int
) -> tuple[array[float], array[float], array[float], bytearray]:
    """min, mean and max columns of ``n`` NaNs (copies of ``empty``) and ``n`` qualities of
    no sample: one series' share of a window being rolled up."""
    return array("d", empty), array("d", empty), array("d", empty), bytearray([NO_SAMPLE]) * n
