"""The outbox on a real SQLite file: queueing, filters, due times, storage failures."""

import sqlite3

import pytest

from edge.config import Channel
from edge.errors import StorageError
from edge.model import AlarmEvent
from edge.notify import Outbox
from tests.support import FakeClock

SITE = "riverside-laundry"
HOOK = Channel(name="oncall", webhook="https://hooks.example.invalid/steam", min_priority="high")
ALL = Channel(name="log", webhook="http://127.0.0.1:1/log")
AM = Channel(name="cluster", alertmanager="http://127.0.0.1:9093")


def _connect(path) -> sqlite3.Connection:
    conn = sqlite3.connect(path)
    conn.execute("PRAGMA journal_mode=WAL")
    return conn


def _event(n: int, *, priority: str = "high", kind: str = "raised", alarm: str = "drum-high"):
    return AlarmEvent(
        alarm=alarm,
        kind=kind,
        time=900.0 + n,
        priority=priority,
        value=1.25e6,
        limit=1.2e6,
        message=f"event {n}",
        state="unack_alarm",
        id=n,
        key=f"{SITE}/{n}",
    )


@pytest.fixture
def clock():
    return FakeClock()


@pytest.fixture
def outbox(tmp_path, clock):
    conn = _connect(tmp_path / "state.sqlite")
    yield Outbox(conn, site=SITE, clock=clock)
    conn.close()


def test_enqueue_one_row_per_wanting_channel(outbox):
    """A high event goes to both webhooks; a low one only to the channel that takes low."""
    added = outbox.enqueue([HOOK, ALL], [_event(1), _event(2, priority="low")])
    assert added == 3
    assert outbox.pending_counts() == {"oncall": 1, "log": 2}


def test_pending_counts_lists_idle_channels(outbox):
    """Configured channels with nothing queued show 0 (for the pending gauge)."""
    assert outbox.pending_counts(["oncall", "cluster"]) == {"oncall": 0, "cluster": 0}


def test_same_event_twice_is_queued_once(outbox):
    """(channel, key) is unique: a repeated enqueue adds nothing."""
    outbox.enqueue([ALL], [_event(1)])
    assert outbox.enqueue([ALL], [_event(1)]) == 0
    assert outbox.pending("log") == 1


def test_alertmanager_skips_acknowledgements(outbox):
    """An acknowledgement is not queued for Alertmanager, a clear is."""
    outbox.enqueue([AM], [_event(1, kind="acknowledged"), _event(2, kind="cleared")])
    assert [i.event.kind for i in outbox.due("cluster", 2000.0)] == ["cleared"]


def test_item_round_trips_the_event(outbox):
    """The queued item carries the whole event, its key and the site."""
    outbox.enqueue([ALL], [_event(5)])
    (item,) = outbox.due("log", 1000.0)
    assert item.event == _event(5)
    assert (item.key, item.site, item.created, item.attempts) == (f"{SITE}/5", SITE, 1000.0, 0)


def test_key_defaults_to_site_and_journal_id(outbox):
    """An event with an id but no key gets site/id."""
    event = AlarmEvent(alarm="a", kind="raised", time=1.0, priority="high", id=77)
    outbox.enqueue([ALL], [event])
    assert outbox.due("log", 1000.0)[0].key == f"{SITE}/77"


def test_unjournaled_event_is_refused(outbox):
    """An event without id or key is a programming error, not a silent drop."""
    with pytest.raises(ValueError, match="journal it first"):
        outbox.enqueue([ALL], [AlarmEvent(alarm="a", kind="raised", time=1.0, priority="high")])


def test_due_is_oldest_first_and_limited(outbox):
    """due() returns queue order, at most `limit` items."""
    outbox.enqueue([ALL], [_event(n) for n in range(1, 6)])
    assert [i.key for i in outbox.due("log", 1000.0, limit=3)] == [f"{SITE}/{n}" for n in (1, 2, 3)]


def test_failed_item_waits_for_its_next_try(outbox):
    """mark_failed counts the attempt and hides the item until next_try."""
    outbox.enqueue([ALL], [_event(1)])
    ids = [i.id for i in outbox.due("log", 1000.0)]
    outbox.mark_failed(ids, next_try=1030.0, error="HTTP 500")
    assert outbox.due("log", 1029.9) == []
    assert outbox.next_try("log") == 1030.0
    (item,) = outbox.due("log", 1030.0)
    assert item.attempts == 1
    assert outbox.pending("log") == 1


def test_delivered_item_leaves_the_queue(outbox):
    """mark_delivered removes the item from pending and due."""
    outbox.enqueue([ALL], [_event(1), _event(2)])
    outbox.mark_delivered([outbox.due("log", 1000.0)[0].id])
    assert outbox.pending("log") == 1
    assert [i.key for i in outbox.due("log", 1000.0)] == [f"{SITE}/2"]


def test_latest_delivered_is_per_alarm(outbox):
    """latest_delivered gives the last delivered event of each alarm."""
    events = [
        _event(1, alarm="feed-low"),
        _event(2, alarm="drum-high"),
        _event(3, alarm="feed-low", kind="cleared"),
    ]
    outbox.enqueue([AM], events)
    outbox.mark_delivered([i.id for i in outbox.due("cluster", 1000.0)])
    latest = {i.event.alarm: i.event.kind for i in outbox.latest_delivered("cluster")}
    assert latest == {"drum-high": "raised", "feed-low": "cleared"}


def test_prune_keeps_the_last_item_of_each_alarm(outbox, clock):
    """prune deletes old delivered rows but keeps what restore needs."""
    outbox.enqueue([AM], [_event(1), _event(2, kind="cleared"), _event(3)])
    outbox.mark_delivered([i.id for i in outbox.due("cluster", 1000.0)])
    clock.t = 5000.0
    assert outbox.prune(before=4000.0) == 2
    assert [i.key for i in outbox.latest_delivered("cluster")] == [f"{SITE}/3"]


def test_enqueue_joins_the_callers_transaction(outbox):
    """Inside the caller's transaction the outbox does not commit: a rollback undoes it."""
    conn = outbox._conn
    conn.execute("CREATE TABLE IF NOT EXISTS journal_probe (x)")
    conn.execute("INSERT INTO journal_probe VALUES (1)")  # opens a transaction
    assert conn.in_transaction
    outbox.enqueue([ALL], [_event(1)])
    conn.rollback()
    assert outbox.pending("log") == 0


def test_listener_hears_which_channel_got_rows(outbox):
    """add_listener is told the channel names that received rows."""
    heard: list[str] = []
    outbox.add_listener(heard.append)
    outbox.enqueue([HOOK, ALL], [_event(1, priority="low")])
    assert heard == ["log"]


def test_queue_survives_reopening_the_file(tmp_path, clock):
    """Rows written by one connection are pending for the next one on the same file."""
    path = tmp_path / "state.sqlite"
    first = _connect(path)
    Outbox(first, site=SITE, clock=clock).enqueue([ALL], [_event(1), _event(2)])
    first.close()
    second = _connect(path)
    assert Outbox(second, site=SITE, clock=clock).pending("log") == 2
    second.close()


def test_read_only_file_raises_storage_error(tmp_path, clock):
    """Enqueue on a read-only database raises StorageError; nothing is half-written."""
    path = tmp_path / "state.sqlite"
    conn = _connect(path)
    Outbox(conn, site=SITE, clock=clock).enqueue([ALL], [_event(1)])
    conn.close()
    ro = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    outbox = Outbox(ro, site=SITE, clock=clock)
    with pytest.raises(StorageError, match=r"cannot queue 1 notification.*readonly"):
        outbox.enqueue([ALL], [_event(2)])
    assert outbox.pending("log") == 1
    ro.close()


def test_read_only_file_without_table_fails_at_start(tmp_path, clock):
    """An outbox that cannot create its table raises StorageError when built."""
    path = tmp_path / "empty.sqlite"
    sqlite3.connect(path).close()
    ro = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    with pytest.raises(StorageError, match="cannot create its table"):
        Outbox(ro, site=SITE, clock=clock)
    ro.close()


def test_full_database_raises_storage_error(outbox):
    """A full file (page limit reached) raises StorageError and rolls the batch back."""
    conn = outbox._conn
    pages = conn.execute("PRAGMA page_count").fetchone()[0]
    conn.execute(f"PRAGMA max_page_count = {pages + 2}")
    big = [
        AlarmEvent(alarm="a", kind="raised", time=1.0, priority="high", message="x" * 4000, id=n)
        for n in range(1, 40)
    ]
    with pytest.raises(StorageError, match="full"):
        outbox.enqueue([ALL], big)
    assert outbox.pending("log") == 0


def test_non_finite_value_is_queued_as_null(outbox):
    """A NaN value (bad data) is stored as null: the JSON stays valid, nothing is refused."""
    event = AlarmEvent(
        alarm="a", kind="raised", time=1.0, priority="high", value=float("nan"), id=3
    )
    outbox.enqueue([ALL], [event])
    assert outbox.due("log", 1000.0)[0].event.value is None
