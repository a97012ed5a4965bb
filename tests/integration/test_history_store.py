"""The history file on a real SQLite file: frames sealed into windows, tiers made from the
tier below, pruning by age and by size, reading back after the file was closed."""

from __future__ import annotations

import pytest

from edge.errors import HistoryQueryError
from edge.history import Frame, HistoryReader, HistoryStore, Layout, SourceChange, tiers
from edge.model import GOOD, PointState, Reading, Sample, bad, uncertain

DAY0 = 1_800_000_000.0 - 1_800_000_000.0 % 86400  # midnight UTC
LADDER = tiers(6 * 3600.0, 7 * 86400.0, 30 * 86400.0)
LAYOUT = Layout.of(["drum"], ["drum_p"])


def _frame(t: float, p: float, quality=GOOD) -> Frame:
    readings = {
        "pressure": Reading(p, quality, "Pa"),
        "temperature": Reading(460.0, GOOD, "K"),
        "tsat": Reading(453.0, GOOD, "K"),
        "superheat": Reading(7.0, GOOD, "K"),
    }
    point = PointState("drum", "superheated", readings, quality)
    return Frame.capture(t, LAYOUT, {"drum": point}, {"drum_p": Sample("drum_p", p, GOOD, t, t)})


def _fill(store: HistoryStore, seconds: int, start: float = DAY0, bad_from: int = -1) -> None:
    for i in range(seconds):
        q = bad("comm_loss") if bad_from <= i < bad_from + 10 else GOOD
        t = start + i
        store.write([_frame(t, 1.0e6 + i, q)])
        store.seal(t)


@pytest.fixture
def store(tmp_path):
    s = HistoryStore.open(str(tmp_path / "h.sqlite"), LADDER)
    yield s
    s.close()


def test_every_pass_comes_back_with_its_quality(store):
    """Thirty seconds of a window sealed to chunks read back value by value, bad as bad."""
    _fill(store, 180, bad_from=100)
    s = store.query("drum.pressure", DAY0 + 90, DAY0 + 120, None, DAY0 + 180)
    assert s.tier.index == 0 and len(s.run) == 30
    assert s.run.means[:2] == [1.0e6 + 90, 1.0e6 + 91]
    assert list(s.run.quality[8:22]) == [2, 2] + [0] * 10 + [2, 2]


def test_unsealed_frames_are_read_from_the_recent_table(store):
    """The newest seconds (not yet a complete window) are part of every answer."""
    _fill(store, 90)
    s = store.query("drum.pressure", DAY0 + 60, DAY0 + 90, None, DAY0 + 90)
    assert len(s.run) == 30 and s.run.means[-1] == 1.0e6 + 89


def test_minute_tier_is_made_from_complete_windows(store):
    """After two hours, 1-minute min/mean/max of the first hour; a bad stretch marks it."""
    _fill(store, 7260, bad_from=100)
    assert store.roll_up(1)
    s = store.query("drum.pressure", DAY0, DAY0 + 3600, 60.0, DAY0 + 7 * 86400)
    assert s.tier.index == 1 and len(s.run) == 60
    assert (s.run.mins[0], s.run.means[0], s.run.maxs[0]) == (1.0e6, 1.0e6 + 29.5, 1.0e6 + 59)
    assert s.run.quality[1] == 0 and s.run.means[1] == 1.0e6 + 86.5  # 50 good of 60


def test_a_fold_to_a_step_covers_a_tier_and_its_unrolled_tail(store):
    """A 10-minute step over 2 h: the minute tier for hour one, every pass for hour two."""
    _fill(store, 7200)
    store.roll_up(1)
    s = store.query("drum.pressure", DAY0, DAY0 + 7200, 600.0, DAY0 + 7200)
    assert len(s.run) == 12 and s.run.maxs[-1] == 1.0e6 + 7199


def test_the_same_query_after_reopening_gives_the_same_answer(tmp_path):
    """Closed and opened again (a restart): the same samples."""
    path = str(tmp_path / "h.sqlite")
    store = HistoryStore.open(path, LADDER)
    _fill(store, 200)
    before = store.query("drum_p", DAY0, DAY0 + 200, None, DAY0 + 200).run
    store.close()
    reader = HistoryReader.open(path, LADDER)
    after = reader.query("drum_p", DAY0, DAY0 + 200, None, DAY0 + 200).run
    reader.close()
    assert after.times == before.times and after.means == before.means and len(after) == 200


def test_old_windows_are_pruned_one_step_at_a_time_once_rolled_up(store):
    """Past its keep (6 h), a tier-0 window goes only after the minute tier holds it."""
    _fill(store, 180)
    later = DAY0 + 7 * 3600
    assert store.prune(later, 10**12) == 0  # the minute tier does not hold it yet
    for t in (DAY0 + 3 * 3600, DAY0 + 3 * 3600 + 61):  # seals a window three hours on
        store.write([_frame(t, 1.0)])
        store.seal(t)
    while store.roll_up(1):
        pass
    assert store.prune(later, 10**12) == 5  # one window: its five series
    first = store._conn.execute("SELECT MIN(start) FROM chunks WHERE tier=0").fetchone()[0]
    assert first == DAY0 + 60


def test_beyond_the_size_limit_the_oldest_data_goes(store):
    """With max_size below what is stored, a prune step deletes the oldest window."""
    _fill(store, 300)
    assert store.used_bytes() > 10_000
    assert store.prune(DAY0 + 300, 10_000) > 0
    first = store._conn.execute("SELECT MIN(start) FROM chunks WHERE tier=0").fetchone()[0]
    assert first == DAY0 + 60


def test_source_changes_come_with_the_state_at_the_window_start(store):
    """The last change before 'since' tells the state then; changes inside follow."""
    store.write([], [SourceChange(DAY0, "plc", True, None)])
    store.write([], [SourceChange(DAY0 + 100, "plc", False, "timeout")])
    changes = store.source_changes(DAY0 + 50, DAY0 + 200)
    assert [(c.time, c.up, c.detail) for c in changes] == [
        (DAY0, True, None),
        (DAY0 + 100, False, "timeout"),
    ]


def test_an_unknown_series_is_a_clear_error(store):
    """A name never stored: HistoryQueryError naming it."""
    with pytest.raises(HistoryQueryError, match="no history for 'nope'"):
        store.query("nope", DAY0, DAY0 + 10, None, DAY0 + 10)


def test_a_frame_older_than_the_sealed_windows_is_dropped(store):
    """After the clock went back, a frame inside a sealed window is counted, not written."""
    _fill(store, 130)
    assert store.write([_frame(DAY0 + 5, 1.0)]) == 0 and store.frames_dropped == 1


def test_a_reload_mid_window_keeps_each_series_continuous(store):
    """Frames of two layouts (a point added by a reload) in one window: each series reads
    back every pass it was in, the new one from its first pass on."""
    wide = Layout.of(["drum", "hp"], ["drum_p"])
    for i in range(70):
        t = DAY0 + i
        if i < 30:
            store.write([_frame(t, 1.0e6 + i)])
        else:
            f = _frame(t, 1.0e6 + i)
            hp = PointState("hp", "superheated", {"pressure": Reading(4.0e6, GOOD, "Pa")}, GOOD)
            drum = PointState("drum", "superheated", {"pressure": Reading(1.0e6 + i, GOOD)}, GOOD)
            f = Frame.capture(t, wide, {"drum": drum, "hp": hp}, {})
            store.write([f])
        store.seal(t)
    drum = store.query("drum.pressure", DAY0, DAY0 + 70, None, DAY0 + 70).run
    hp = store.query("hp.pressure", DAY0, DAY0 + 70, None, DAY0 + 70).run
    assert drum.means == [1.0e6 + i for i in range(70)]
    assert hp.times[0] == DAY0 + 30 and len(hp) == 40 and set(hp.means) == {4.0e6}


def test_the_minute_tier_is_the_fold_of_every_pass_series_by_series(store):
    """Minute intervals made window by window equal the general fold of each series' run
    of every pass (``fold``, as the coarser tiers are made): good, uncertain and bad
    stretches, passes a series was not in (a reload mid-window), minutes without data."""
    wide = Layout.of(["drum", "hp"], ["drum_p", "hp_p"])
    qualities = [GOOD, GOOD, GOOD, uncertain("stale"), bad("comm_loss")]
    for i in range(2 * 3600 + 60):
        if 1500 <= i < 1700:
            continue  # the monitor was down: minutes without any pass
        t = DAY0 + i + 0.25
        q = qualities[(i // 7) % 5] if 300 <= i < 900 else GOOD
        readings = {
            "pressure": Reading(1.0e6 + (i * 37) % 1000, q, "Pa"),
            "temperature": Reading(460.0 + (i % 13) / 8, GOOD, "K"),
        }
        points = {"drum": PointState("drum", "superheated", readings, q)}
        tags = {"drum_p": Sample("drum_p", 9.0e5 + i % 17, q, t, t)}
        if 2000 <= i < 2900:  # a second point for a while, from mid-window to mid-window
            points["hp"] = PointState("hp", "superheated", {"pressure": Reading(4.0e6, q)}, q)
            tags["hp_p"] = Sample("hp_p", 3.9e6 + i % 5, GOOD, t, t)
        store.write([Frame.capture(t, wide, points, tags)])
        store.seal(t)
    c = store._conn
    assert store.roll_up(1) and store.roll_up(1)
    tier, below = LADDER[1], LADDER[0]
    made = c.execute("SELECT series, start, v, q FROM chunks WHERE tier=1 ORDER BY 1, 2")
    made = made.fetchall()
    assert len(made) == 3 * 2 + 2  # drum p, T and its tag both hours; hp p and tag in one
    for sid, start, v, q in made:
        assert (sid, start, v, q) == store._folded(below, tier, sid, start, start + 3600, 60)
    s = store.query("hp.pressure", DAY0, DAY0 + 7200, 60.0, DAY0 + 7 * 86400)
    assert s.tier.index == 1 and s.run.times[0] == DAY0 + 1980 and len(s.run) == 16
