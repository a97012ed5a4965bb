"""Schema 2 of the history file on real SQLite files: a file of schema 1 (rows keyed by
series first) opens without moving a row, answers as before and takes new windows in the
time-major table; roll-ups read both tables and equal the fold of the raw data; a roll-up
made slice by slice is invisible until its last slice and goes on after a restart."""

from __future__ import annotations

import sqlite3
from array import array

import pytest

import edge.history.store as store_module
from edge.errors import StorageError
from edge.history import Frame, HistoryReader, HistoryStore, Layout, Run, fold, tiers
from edge.history.frames import pack_q, pack_v
from edge.model import GOOD, PointState, Reading, Sample, bad

DAY0 = 1_800_000_000.0 - 1_800_000_000.0 % 86400  # midnight UTC
LADDER = tiers(6 * 3600.0, 7 * 86400.0, 30 * 86400.0)
LAYOUT = Layout.of(["drum", "hp"], ["drum_p"])
NAMES = ("drum.pressure", "drum.temperature", "hp.pressure", "drum_p")

# the chunk table as schema 1 made it (the file format being upgraded from)
SCHEMA_1_CHUNKS = """
CREATE TABLE chunks (
    tier INTEGER NOT NULL, series INTEGER NOT NULL, start INTEGER NOT NULL,
    v BLOB NOT NULL, q BLOB NOT NULL,
    PRIMARY KEY (tier, series, start)) WITHOUT ROWID;
CREATE INDEX chunks_start ON chunks (tier, start);
"""
# what the schema-1 code runs on open, before it reads the version
SCHEMA_1_OPEN = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS series (id INTEGER PRIMARY KEY, name TEXT NOT NULL UNIQUE);
CREATE TABLE IF NOT EXISTS layouts (id INTEGER PRIMARY KEY, names TEXT NOT NULL UNIQUE);
CREATE TABLE IF NOT EXISTS recent (
    time REAL PRIMARY KEY, layout INTEGER NOT NULL, v BLOB NOT NULL, q BLOB NOT NULL);
CREATE TABLE IF NOT EXISTS stamps (start INTEGER PRIMARY KEY, t BLOB NOT NULL);
CREATE TABLE IF NOT EXISTS chunks (
    tier INTEGER NOT NULL, series INTEGER NOT NULL, start INTEGER NOT NULL,
    v BLOB NOT NULL, q BLOB NOT NULL,
    PRIMARY KEY (tier, series, start)) WITHOUT ROWID;
CREATE INDEX IF NOT EXISTS chunks_start ON chunks (tier, start);
CREATE TABLE IF NOT EXISTS rolled (tier INTEGER PRIMARY KEY, until INTEGER NOT NULL);
CREATE TABLE IF NOT EXISTS source_log (
    time REAL NOT NULL, source TEXT NOT NULL, up INTEGER NOT NULL, detail TEXT);
CREATE INDEX IF NOT EXISTS source_log_time ON source_log (time);
"""


def _value(i: int) -> float:
    return 1.0e6 + (i * 37) % 1000


def _frame(i: int) -> Frame:
    t = DAY0 + i
    q = bad("comm_loss") if 400 <= i < 420 else GOOD
    readings = {"pressure": Reading(_value(i), q, "Pa"), "temperature": Reading(460.0, GOOD, "K")}
    points = {"drum": PointState("drum", "superheated", readings, q)}
    if i >= 900:  # a point added by a reload
        points["hp"] = PointState("hp", "superheated", {"pressure": Reading(4.0e6 + i, GOOD)}, GOOD)
    tags = {"drum_p": Sample("drum_p", 9.0e5 + i % 17, GOOD, t, t)}
    return Frame.capture(t, LAYOUT, points, tags)


def _fill(store: HistoryStore, first: int, last: int) -> None:
    for i in range(first, last):
        store.write([_frame(i)])
        store.seal(DAY0 + i)


def _to_schema_1(path: str) -> None:
    """Rewrite a file's chunk rows into the schema-1 table, as the schema-1 code left it."""
    c = sqlite3.connect(path, isolation_level=None)
    c.execute("BEGIN")
    c.execute("ALTER TABLE chunks RENAME TO new_rows")
    c.execute("DROP TABLE chunks_v1")
    for statement in SCHEMA_1_CHUNKS.split(";"):
        if statement.strip():
            c.execute(statement)
    c.execute("INSERT INTO chunks SELECT tier, series, start, v, q FROM new_rows")
    c.execute("DROP TABLE new_rows")
    c.execute("UPDATE meta SET value='1' WHERE key='schema_version'")
    c.execute("COMMIT")
    c.close()


def _answers(view, now: float) -> list:
    out = []
    for name in NAMES:
        for since, until, step in ((DAY0, DAY0 + 1500, None), (DAY0 + 30, DAY0 + 1400, 60.0)):
            r = view.query(name, since, until, step, now).run
            out.append((r.times, _bits(r.mins), _bits(r.means), _bits(r.maxs), r.quality))
    return out


def _bits(values: list[float]) -> bytes:
    """Values as bytes, so a NaN (a bad value) equals a NaN."""
    return array("d", values).tobytes()


def _count(path: str, table: str, tier: int) -> int:
    c = sqlite3.connect(path)
    try:
        return c.execute(f"SELECT COUNT(*) FROM {table} WHERE tier=?", (tier,)).fetchone()[0]
    finally:
        c.close()


@pytest.fixture
def old_file(tmp_path):
    """A schema-1 file holding 20 minutes of sealed windows and a few unsealed frames."""
    path = str(tmp_path / "h.sqlite")
    store = HistoryStore.open(path, LADDER)
    _fill(store, 0, 1210)
    expected = _answers(store, DAY0 + 1210)
    store.close()
    _to_schema_1(path)
    return path, expected


def test_a_schema_1_file_is_read_as_it_is_before_and_after_the_upgrade(old_file):
    """Not yet upgraded, a reader answers from the schema-1 table; opened by the writer,
    the rows stay where they were and every answer is the same; new windows go to the
    time-major table and queries across both match the one-table file."""
    path, expected = old_file
    reader = HistoryReader.open(path, LADDER)
    assert _answers(reader, DAY0 + 1210) == expected
    reader.close()
    rows = _count(path, "chunks", 0)
    store = HistoryStore.open(path, LADDER)
    assert _count(path, "chunks_v1", 0) == rows and _count(path, "chunks", 0) == 0
    assert _answers(store, DAY0 + 1210) == expected
    version = store._conn.execute("SELECT value FROM meta WHERE key='schema_version'")
    assert version.fetchone()[0] == "2"
    _fill(store, 1210, 3 * 3600 + 61)
    assert _count(path, "chunks", 0) > 0 and _count(path, "chunks_v1", 0) == rows
    store.close()

    reference = HistoryStore.open(path + ".ref", LADDER)  # the same passes in one table
    _fill(reference, 0, 3 * 3600 + 61)
    store = HistoryStore.open(path, LADDER)
    for name in NAMES:
        for since, until in ((DAY0, DAY0 + 3 * 3600), (DAY0 + 1100, DAY0 + 1300)):
            a = store.query(name, since, until, None, DAY0 + 3 * 3600 + 61).run
            b = reference.query(name, since, until, None, DAY0 + 3 * 3600 + 61).run
            assert (a.times, _bits(a.means), a.quality) == (b.times, _bits(b.means), b.quality)
    store.close()
    reference.close()


def test_the_roll_up_across_both_tables_is_the_fold_of_the_raw_passes(old_file):
    """The first hour (20 minutes of schema-1 rows, 40 of time-major ones) made into
    1-minute intervals equals ``fold`` of the values written, pass by pass."""
    path, _ = old_file
    store = HistoryStore.open(path, LADDER)
    _fill(store, 1210, 3600 + 61)
    assert store.roll_up(1)
    for name in NAMES:
        raw = Run.empty()
        for i in range(3600):
            f = _frame(i)
            k = f.layout.names.index(name)
            q = f.quality[k]
            if q == 255:
                continue
            v = store_module.unpack_v(f.values[4 * k : 4 * k + 4])[0]
            raw.extend(Run([DAY0 + i], [v], [v], [v], bytearray([q])))
        want = fold(raw, DAY0, 60.0, 60, keep_empty=False)
        got = store.query(name, DAY0, DAY0 + 3600, 60.0, DAY0 + 7 * 86400)
        assert got.tier.index == 1
        assert got.run.times == want.times and got.run.quality == want.quality
        assert _bits(got.run.mins) == _bits(want.mins) and _bits(got.run.maxs) == _bits(want.maxs)
        assert got.run.means == pytest.approx(want.means, rel=1e-7, nan_ok=True)  # float32
    store.close()


def test_the_day_tier_is_folded_from_hours_in_both_tables(tmp_path):
    """1-minute hours of a day, half in the schema-1 table and half in the time-major
    one (all good, or some intervals bad, or some without samples): each series' day of
    10-minute intervals equals the general fold of its run."""
    path = str(tmp_path / "h.sqlite")
    store = HistoryStore.open(path, LADDER)
    sids = store._ids(NAMES)
    c = store._conn
    c.execute("BEGIN")
    for h in range(24):
        table = "chunks_v1" if h < 12 else "chunks"
        for sid in sids:
            if sid == sids[2] and h < 5:
                continue  # a series that began later
            v = [1.0e6 + sid * 10 + h + 0.37 * j for j in range(60)]
            q = bytearray([2] * 60)
            for j in range(h % 7, 60, 17) if h % 3 == 0 else ():  # other hours all good
                q[j] = 0
                v[j] = float("nan")
            if h == 20:
                q[30:] = bytes([255] * 30)  # a reload mid-hour
            c.execute(
                f"INSERT INTO {table} (tier, series, start, v, q) VALUES (1, ?, ?, ?, ?)",
                (sid, int(DAY0) + 3600 * h, pack_v([*v, *[x + 5 for x in v], *v]), pack_q(q, 60)),
            )
    c.execute("INSERT INTO rolled VALUES (1, ?)", (int(DAY0) + 86400,))
    c.execute("COMMIT")
    store.close()
    store = HistoryStore.open(path, LADDER)
    assert store._old == "chunks_v1"
    assert store.roll_up(2)
    made = store._conn.execute("SELECT series, start, v, q FROM chunks WHERE tier=2").fetchall()
    assert sorted(r[0] for r in made) == sorted(sids)
    for sid, start, v, q in made:
        assert (sid, start, v, q) == store._folded(
            LADDER[1], LADDER[2], sid, start, start + 86400, 144
        )
    store.close()


def test_pruning_empties_both_tables(old_file):
    """Old windows go from the schema-1 table as from the new one; once empty, the
    schema-1 table is not read any more."""
    path, _ = old_file
    store = HistoryStore.open(path, LADDER)
    _fill(store, 1210, 3600 + 61)
    while store.roll_up(1):
        pass
    later = DAY0 + 7 * 3600 + 3600
    while store.prune(later, 10**12):
        pass
    assert _count(path, "chunks_v1", 0) == 0
    first = store._conn.execute("SELECT MIN(start) FROM chunks WHERE tier=0").fetchone()[0]
    assert first == DAY0 + 3600  # the window of the hour not made into minutes yet
    assert store._old is None
    s = store.query("drum.pressure", DAY0, DAY0 + 3600, 60.0, later)
    assert len(s.run) == 60
    store.close()


def test_a_roll_up_in_slices_is_seen_only_when_whole_and_resumes_after_a_restart(
    tmp_path, monkeypatch
):
    """Two series a slice: between slices the minute tier is not complete (a query reads
    every pass); killed between slices and opened again, it goes on from the slices
    written; the rows equal those made in one go."""
    path = str(tmp_path / "h.sqlite")
    store = HistoryStore.open(path, LADDER)
    _fill(store, 0, 3661)
    store.close()
    whole = HistoryStore.open(path + ".whole", LADDER)
    _fill(whole, 0, 3661)
    assert whole.roll_up(1)
    want = whole._conn.execute("SELECT * FROM chunks WHERE tier=1 ORDER BY series").fetchall()
    whole.close()

    monkeypatch.setattr(store_module, "ROLL_UP_VALUES", 7200)  # two series of 60 windows
    store = HistoryStore.open(path, LADDER)
    before = store.query("drum_p", DAY0, DAY0 + 3600, 60.0, DAY0 + 86400).run
    assert store.roll_up_part(1)
    assert store.rolled_until().get(1) is None
    assert store.query("drum_p", DAY0, DAY0 + 3600, 60.0, DAY0 + 86400).run == before
    store.close()  # as a crash between slices would leave it
    store = HistoryStore.open(path, LADDER)
    steps = 0
    while store.roll_up_part(1):
        steps += 1
    assert store.rolled_until()[1] == DAY0 + 3600 and steps >= 2
    got = store._conn.execute("SELECT * FROM chunks WHERE tier=1 ORDER BY series").fetchall()
    assert got == want
    store.close()


def test_a_newer_schema_is_refused_and_the_schema_1_code_adds_nothing_to_this_one(tmp_path):
    """A file of schema 3 is refused untouched; on a file of schema 2, the tables the
    schema-1 code makes before it reads the version all exist already (it then refuses
    the file on its version), so no index lands on the time-major table."""
    path = str(tmp_path / "h.sqlite")
    store = HistoryStore.open(path, LADDER)
    _fill(store, 0, 70)
    store.close()
    c = sqlite3.connect(path, isolation_level=None)
    schema = c.execute("SELECT type, name, sql FROM sqlite_schema ORDER BY name").fetchall()
    c.executescript(f"BEGIN IMMEDIATE;{SCHEMA_1_OPEN}COMMIT;")
    assert c.execute("SELECT type, name, sql FROM sqlite_schema ORDER BY name").fetchall() == schema
    assert c.execute("SELECT value FROM meta WHERE key='schema_version'").fetchone()[0] == "2"
    c.execute("UPDATE meta SET value='3' WHERE key='schema_version'")
    c.close()
    with pytest.raises(StorageError, match="newer version"):
        HistoryStore.open(path, LADDER)
