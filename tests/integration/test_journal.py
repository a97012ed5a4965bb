"""The alarm journal on a real SQLite file: events with ids and keys, states restored,
paging, retention, health figures and the shared connection."""

from __future__ import annotations

import sqlite3
from dataclasses import replace
from pathlib import Path

import pytest

from edge.alarms.definitions import AlarmDef
from edge.alarms.engine import AlarmState, step
from edge.alarms.journal import Journal
from edge.model import GOOD, AlarmEvent, Reading

SITE = "millbrook-dairy"


def event(alarm: str = "drum-p-high", kind: str = "raised", t: float = 100.0) -> AlarmEvent:
    return AlarmEvent(
        alarm=alarm,
        kind=kind,
        time=t,
        priority="high",
        value=1.05e6,
        limit=1e6,
        message=f"{alarm} {kind}",
        state="unacknowledged",
    )


@pytest.fixture
def journal(tmp_path: Path):
    j = Journal.open(str(tmp_path / "state.sqlite"), site=SITE)
    yield j
    j.close()


def test_open_uses_wal_and_full_sync(journal: Journal):
    """The journal runs in WAL mode with synchronous=FULL (2)."""
    c = journal.connection
    assert c.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    assert c.execute("PRAGMA synchronous").fetchone()[0] == 2


def test_open_creates_missing_folders(tmp_path: Path):
    """A storage path in a folder that does not exist yet is created."""
    j = Journal.open(str(tmp_path / "a" / "b" / "state.sqlite"), site=SITE)
    j.close()
    assert (tmp_path / "a" / "b" / "state.sqlite").is_file()


def test_append_assigns_ids_and_site_keys(journal: Journal):
    """Stored events get consecutive ids and the key '<site>/<id>'."""
    stored = journal.append([event(), event(kind="cleared")])
    assert [e.id for e in stored] == [1, 2]
    assert [e.key for e in stored] == [f"{SITE}/1", f"{SITE}/2"]


def test_events_read_back_oldest_first(journal: Journal):
    """events() returns every field as stored, oldest first."""
    e = AlarmEvent(
        alarm="a",
        kind="shelved",
        time=5.0,
        priority="low",
        value=None,
        limit=2.0,
        quality="bad(comm_loss)",
        user="alice",
        comment="swap",
        message="m",
        state="shelved",
    )
    journal.append([e])
    [back] = journal.events()
    assert back == replace(e, id=1, key=f"{SITE}/1")


def test_events_page_by_id(journal: Journal):
    """events(since_id, limit) pages through the journal."""
    journal.append([event(t=float(i)) for i in range(7)])
    assert [e.id for e in journal.events(since_id=2, limit=3)] == [3, 4, 5]
    assert [e.id for e in journal.events(since_id=6)] == [7]


def test_states_survive_reopening(tmp_path: Path):
    """States committed with events are there after the file is opened again."""
    path = str(tmp_path / "state.sqlite")
    j = Journal.open(path, site=SITE)
    s = AlarmState("a", "high", active=True, unacknowledged=True, since=10.0, active_since=10.0)
    j.commit([event("a")], {"a": s})
    j.close()
    j = Journal.open(path, site=SITE)
    assert j.load_states() == {"a": s}
    assert j.append([event()])[0].id == 2
    j.close()


def test_restored_alarm_is_not_announced_again(tmp_path: Path):
    """An alarm active and unacknowledged before a restart is still so, and not raised anew."""
    path = str(tmp_path / "state.sqlite")
    d = AlarmDef(name="a", signal="x", kind="high", priority="high", limit=100.0)
    signals = {"x": Reading(101.0, GOOD)}
    j = Journal.open(path, site=SITE)
    states, events = step({"a": d}, {}, signals, 0.0)
    j.commit(events, states)
    j.close()
    j = Journal.open(path, site=SITE)
    states, events = step({"a": d}, j.load_states(), signals, 60.0)
    j.close()
    assert events == [] and states["a"].state == "unacknowledged"


def test_only_changed_states_are_written(journal: Journal):
    """A state that changed only its value is not rewritten; a life-cycle change is."""
    s = AlarmState("a", "high", active=True, value=1.0)
    journal.save_states({"a": s})
    assert journal.commit([], {"a": AlarmState("a", "high", active=True, value=2.0)}) == []
    assert journal.load_states()["a"].value == 1.0
    journal.save_states({"a": AlarmState("a", "high", active=False, value=3.0)})
    assert journal.load_states()["a"].value == 3.0


def test_forget_states_drops_removed_alarms(journal: Journal):
    """forget_states deletes saved states of alarms no longer defined."""
    journal.save_states({"a": AlarmState("a", "low"), "b": AlarmState("b", "low", active=True)})
    journal.forget_states(["a"])
    assert list(journal.load_states()) == ["a"]


def test_prune_by_age(tmp_path: Path):
    """prune deletes events older than the retention."""
    j = Journal.open(str(tmp_path / "s.sqlite"), site=SITE, retention=3600.0)
    j.append([event(t=0.0), event(t=6000.0), event(t=9000.0)])
    assert j.prune(now=9000.0) == 1
    assert [e.time for e in j.events()] == [6000.0, 9000.0]
    j.close()


def test_prune_by_count_keeps_the_newest(tmp_path: Path):
    """prune keeps at most max_events, the newest ones."""
    j = Journal.open(str(tmp_path / "s.sqlite"), site=SITE, max_events=3)
    j.append([event(t=float(i)) for i in range(5)])
    assert j.prune(now=10.0) == 2
    assert [e.id for e in j.events()] == [3, 4, 5]
    j.close()


def test_ids_are_never_reused_after_pruning(tmp_path: Path):
    """After pruning everything, the next event gets a new id (keys stay unique)."""
    j = Journal.open(str(tmp_path / "s.sqlite"), site=SITE, retention=1.0)
    j.append([event(t=0.0), event(t=0.0)])
    j.prune(now=100.0)
    assert j.append([event(t=100.0)])[0].id == 3
    j.close()


def test_health_from_the_journal(journal: Journal):
    """health() finds flood, chattering and the top alarm from stored events."""
    now = 10_000.0
    rows = [event(f"a{i}", t=now - 500.0 + i) for i in range(9)]
    rows += [event("pump", t=now - 30.0 + i) for i in range(3)]
    rows += [event("pump", kind="cleared", t=now - 1.0)]
    journal.append(rows)
    h = journal.health(now)
    assert (h.rate_10min, h.flood) == (12, True)  # > 10 per 10 min: ISA-18.2 / EEMUA 191
    assert h.chattering == ["pump"]  # 3 activations in 60 s: ISA-18.2 practice
    assert h.top[0] == ("pump", 3)


def test_health_recounts_the_top_list_at_most_every_minute(journal: Journal):
    """The 7-day top-10 count is reused for 60 s, then counted again."""
    journal.append([event("a", t=100.0)])
    assert journal.health(200.0).top == [("a", 1)]
    journal.append([event("b", t=201.0), event("b", t=202.0)])
    assert journal.health(259.0).top == [("a", 1)]
    assert journal.health(260.0).top == [("b", 2), ("a", 1)]


def test_health_reports_stale_alarms_from_saved_states(journal: Journal):
    """An alarm saved active since more than 24 h ago is stale."""
    s = AlarmState("old", "low", active=True, unacknowledged=False, active_since=0.0)
    journal.save_states({"old": s})
    assert journal.health(86_401.0).stale == ["old"]  # > 24 h: ISA-18.2


def test_after_hook_runs_in_the_same_transaction(journal: Journal):
    """A table written by the after-hook (the outbox) commits with the events."""
    c = journal.connection
    c.execute("CREATE TABLE queue (key TEXT)")

    def enqueue(conn: sqlite3.Connection, stored: list[AlarmEvent]) -> None:
        conn.executemany("INSERT INTO queue VALUES (?)", [(e.key,) for e in stored])

    journal.commit([event()], after=enqueue)
    assert c.execute("SELECT key FROM queue").fetchall() == [(f"{SITE}/1",)]


def test_after_hook_failing_on_its_data_is_quarantined_and_events_kept(journal: Journal):
    """A queue row the hook can never write (a constraint it breaks every time) is set
    aside in the quarantine table and counted; the events are written, nothing waits."""
    c = journal.connection
    c.execute("CREATE TABLE queue (key TEXT NOT NULL)")

    def broken(conn: sqlite3.Connection, stored: list[AlarmEvent]) -> None:
        conn.execute("INSERT INTO queue VALUES (NULL)")

    assert [e.id for e in journal.commit([event()], after=broken)] == [1]
    assert journal.backlog == 0 and journal.quarantined == 1
    assert [e.id for e in journal.commit([event(kind="cleared")])] == [2]
    assert [e.kind for e in journal.events()] == ["raised", "cleared"]


def test_site_is_recorded(journal: Journal):
    """The meta table names the site and the schema version."""
    rows = dict(journal.connection.execute("SELECT key, value FROM meta").fetchall())
    assert rows == {"schema_version": "1", "site": SITE}


def test_a_state_seen_before_is_written_again_after_another_was_saved(journal: Journal):
    """Going back to an earlier state object after a change saves it again."""
    x = AlarmState("a", "high", active=True)
    y = AlarmState("a", "high", active=False)
    journal.commit([], {"a": x})
    journal.commit([], {"a": x})  # the same object: nothing to compare or write
    journal.commit([], {"a": y})
    journal.commit([], {"a": x})
    assert journal.load_states()["a"].active is True
