"""The pure parts of the history: frames, folding into intervals, tier choice, time words."""

from __future__ import annotations

import math
from datetime import UTC, datetime

import pytest

from edge.errors import HistoryQueryError
from edge.history import Frame, Layout, Run, choose_tier, fold, parse_instant, parse_step, tiers
from edge.history.frames import NO_SAMPLE, pack_q, unpack_q, unpack_v
from edge.model import GOOD, PointState, Reading, Sample, bad, uncertain

NOW = 1_800_000_000.0
LADDER = tiers(6 * 3600.0, 7 * 86400.0, 30 * 86400.0)


def _point(p: float, q=GOOD) -> PointState:
    readings = {
        "pressure": Reading(p, q, "Pa"),
        "temperature": Reading(460.0, GOOD, "K"),
        "tsat": Reading(453.0, GOOD, "K"),
        "superheat": Reading(7.0, GOOD, "K"),
    }
    return PointState("drum", "superheated", readings, q)


def test_frame_keeps_point_figures_then_tags_in_layout_order():
    """Four point series per point (pressure, temperature, tsat, superheat), then tags."""
    layout = Layout.of(["drum"], ["drum_p"])
    f = Frame.capture(
        NOW, layout, {"drum": _point(1.0e6)}, {"drum_p": Sample("drum_p", 9e5, GOOD, NOW, NOW)}
    )
    assert layout.names == (
        "drum.pressure",
        "drum.temperature",
        "drum.tsat",
        "drum.superheat",
        "drum_p",
    )
    assert list(unpack_v(f.values)) == [1.0e6, 460.0, 453.0, 7.0, 9e5]
    assert list(f.quality) == [2, 2, 2, 2, 2]


def test_frame_stores_a_bad_value_as_nan_and_a_missing_point_as_no_sample():
    """A bad reading is never kept as a number; an unknown point or tag is 'no sample'."""
    layout = Layout.of(["drum", "gone"], ["lost"])
    f = Frame.capture(NOW, layout, {"drum": _point(1.0e6, bad("comm_loss"))}, {})
    values = list(unpack_v(f.values))
    assert math.isnan(values[0]) and f.quality[0] == 0
    assert list(f.quality[4:]) == [NO_SAMPLE] * 5


def test_a_run_of_one_quality_packs_to_one_byte():
    """Qualities of a window that are all alike take one byte and unpack to the run."""
    assert pack_q(bytes([2] * 60), 60) == b"\x02"
    assert unpack_q(b"\x02", 60) == bytes([2] * 60)
    assert pack_q(bytes([2, 0, 2]), 3) == bytes([2, 0, 2])


def test_fold_gives_min_mean_max_of_good_values_and_the_worst_quality():
    """Bad samples (NaN) are left out of min/mean/max but mark the interval bad."""
    nan = float("nan")
    run = Run([0.0, 1.0, 2.0, 3.0], [1.0, nan, 3.0, 5.0], [1.0, nan, 3.0, 5.0],
              [1.0, nan, 3.0, 5.0], bytearray([2, 0, 2, 1]))  # fmt: skip
    out = fold(run, 0.0, 2.0, 2)
    assert out.times == [0.0, 2.0]
    assert (out.mins[0], out.means[0], out.maxs[0], out.quality[0]) == (1.0, 1.0, 1.0, 0)
    assert (out.mins[1], out.means[1], out.maxs[1], out.quality[1]) == (3.0, 4.0, 5.0, 1)


def test_fold_marks_an_empty_interval_or_leaves_it_out():
    """An interval without samples is NaN with 'no sample', or absent with keep_empty off."""
    run = Run([0.5], [1.0], [1.0], [1.0], bytearray([2]))
    kept = fold(run, 0.0, 1.0, 2)
    assert kept.quality[1] == NO_SAMPLE and math.isnan(kept.means[1])
    assert fold(run, 0.0, 1.0, 2, keep_empty=False).times == [0.0]


def test_refolding_a_bad_marked_interval_keeps_its_values():
    """A folded interval with a bad stretch still has a mean; folding again keeps it."""
    run = Run([0.0, 60.0], [1.0, 3.0], [2.0, 4.0], [3.0, 5.0], bytearray([0, 2]))
    out = fold(run, 0.0, 120.0, 1)
    assert (out.mins[0], out.means[0], out.maxs[0], out.quality[0]) == (1.0, 3.0, 5.0, 0)


def test_a_ten_minute_window_reads_every_pass():
    """Ten minutes back at a fine step: tier 0 (every pass)."""
    assert choose_tier(LADDER, NOW - 600, NOW, 1.0).index == 0


def test_a_day_reads_one_minute_intervals():
    """24 h at about 1000 samples (86 s): the 1-minute tier (every pass is kept 6 h)."""
    assert choose_tier(LADDER, NOW - 86400, NOW, 86.4).index == 1


def test_thirty_days_read_ten_minute_intervals():
    """30 days: the 10-minute tier, the only one reaching back that far."""
    assert choose_tier(LADDER, NOW - 30 * 86400, NOW, 2592.0).index == 2


def test_a_fine_step_far_back_takes_the_finest_tier_that_reaches():
    """A 5 s step over 2 days: every pass does not reach back, so 1-minute intervals."""
    assert choose_tier(LADDER, NOW - 2 * 86400, NOW, 5.0).index == 1


def test_relative_and_rfc3339_instants():
    """-10m, -24h, -7d, now and an RFC 3339 time with Z or an offset."""
    assert parse_instant("-10m", NOW, "since") == NOW - 600
    assert parse_instant("-24h", NOW, "since") == NOW - 86400
    assert parse_instant("-7d", NOW, "since") == NOW - 7 * 86400
    assert parse_instant("now", NOW, "until") == NOW
    t = datetime(2026, 3, 1, 8, 0, tzinfo=UTC).timestamp()
    assert parse_instant("2026-03-01T08:00:00Z", NOW, "since") == t
    assert parse_instant("2026-03-01T09:00:00+01:00", NOW, "since") == t


def test_an_instant_without_offset_is_refused():
    """A local time without its offset is ambiguous: a clear one-line error."""
    with pytest.raises(HistoryQueryError, match="RFC 3339"):
        parse_instant("2026-03-01T08:00:00", NOW, "since")


def test_steps():
    """Steps as 10s, 1min, '5 min', 1h; below 1 s refused."""
    assert parse_step("10s") == 10.0
    assert parse_step("1min") == 60.0
    assert parse_step("5 min") == 300.0
    assert parse_step("1h") == 3600.0
    with pytest.raises(HistoryQueryError, match="at least 1 s"):
        parse_step("500 ms")


def test_uncertain_values_are_kept_with_their_quality():
    """An uncertain reading is stored as a number with quality 1."""
    f = Frame.capture(NOW, Layout.of(["drum"], []), {"drum": _point(1.0e6, uncertain("stale"))}, {})
    assert unpack_v(f.values)[0] == 1.0e6 and f.quality[0] == 1


_CONFIG = """\
version: 1
site: test-site
barometer: {fixed: 101.325 kPa}
sources:
  - {name: plc, protocol: modbus-tcp, host: 127.0.0.1, port: 5020,
     tags: [{name: p, table: holding, address: 0, type: float32, unit: bar, reference: gauge}]}
storage:
  path: /tmp/state.sqlite
  history: {max_size: %s, full_rate: 2 h}
"""


def test_history_settings_read_sizes_and_durations_with_units():
    """max_size '500 MB' is 5e8 bytes; full_rate '2 h' is 7200 s; the file sits beside the
    state file."""
    from edge.config import parse_config
    from edge.history import WriterSettings

    cfg = parse_config(_CONFIG % "500 MB", "c.yaml")
    assert cfg.storage.history.max_size == 500_000_000
    settings = WriterSettings.from_config(cfg)
    assert settings.path == "/tmp/state.history.sqlite" and settings.ladder[0].keep == 7200.0


def test_a_size_without_unit_is_a_config_error():
    """max_size: 500 (no unit) is refused with the line and an example."""
    from edge.config import parse_config
    from edge.errors import ConfigError

    with pytest.raises(ConfigError, match=r"c.yaml:9: storage.history.max_size: .*'1.5 GB'"):
        parse_config(_CONFIG % "500", "c.yaml")


def _one_by_one(layout: Layout, points, snapshot) -> tuple[list[float], list[int]]:
    """The rule of a frame, series by series (what capture does in bulk)."""
    values, quality = [], []

    def keep(value, level) -> None:
        if level == 0 or value is None or not math.isfinite(value):
            values.append(math.nan)
            quality.append(0)
        else:
            values.append(value)
            quality.append(level)

    for name in layout.points:
        p = points.get(name)
        for quantity in ("pressure", "temperature", "tsat", "superheat"):
            r = None if p is None else p.readings.get(quantity)
            if r is None:
                values.append(math.nan)
                quality.append(NO_SAMPLE)
            else:
                keep(r.value, int(r.quality.level))
    for tag in layout.tags:
        s = snapshot.get(tag)
        if s is None:
            values.append(math.nan)
            quality.append(NO_SAMPLE)
        else:
            keep(s.value, int(s.quality.level))
    return values, quality


def test_a_frame_of_many_points_of_every_kind_matches_the_rule_series_by_series():
    """Over several capture chunks: good, uncertain, bad with and without a value, None,
    NaN and inf marked good, a point missing, a figure missing, a tag missing."""
    n = 700
    qualities = [GOOD, uncertain("stale"), bad("comm_loss")]
    odd = [None, math.nan, math.inf, -math.inf]
    points, snapshot = {}, {}
    for i in range(n):
        if i % 97 == 5:
            continue  # not evaluated
        readings = {}
        for j, quantity in enumerate(("pressure", "temperature", "tsat", "superheat")):
            if (i + j) % 89 == 3:
                continue  # a figure the point lacks
            value = odd[(i + j) % 4] if (i * 7 + j) % 31 == 0 else 1.0e5 + i + 0.25 * j
            readings[quantity] = Reading(value, qualities[(i + j) % 11 % 3], "Pa")
        points[f"pt{i:04d}"] = PointState(f"pt{i:04d}", "superheated", readings, GOOD)
    for i in range(2 * n):
        if i % 53 == 7:
            continue  # no first sample yet
        value = odd[i % 4 % 2 + 1] if i % 41 == 0 else 2.0e5 + i
        q = qualities[i % 13 % 3]
        snapshot[f"tag{i:04d}"] = Sample(f"tag{i:04d}", value, q, NOW, NOW)
    layout = Layout.of(
        [f"pt{i:04d}" for i in range(n)] + ["never"], [f"tag{i:04d}" for i in range(2 * n)]
    )
    f = Frame.capture(NOW, layout, points, snapshot)
    values, quality = _one_by_one(layout, points, snapshot)
    assert list(f.quality) == quality
    got = list(unpack_v(f.values))
    assert len(got) == len(values) == len(layout.names)
    for a, b in zip(got, values, strict=True):
        assert (math.isnan(a) and math.isnan(b)) or a == pytest.approx(b, rel=1e-7)
    assert set(quality) == {0, 1, 2, NO_SAMPLE}


def test_frames_of_one_point_and_of_none():
    """A layout of a single point or tag, and an empty one."""
    f = Frame.capture(NOW, Layout.of(["drum"], []), {"drum": _point(1.0e6)}, {})
    assert list(unpack_v(f.values)) == [1.0e6, 460.0, 453.0, 7.0]
    f = Frame.capture(NOW, Layout.of([], ["p"]), {}, {"p": Sample("p", 5.0, GOOD, NOW, NOW)})
    assert list(unpack_v(f.values)) == [5.0] and list(f.quality) == [2]
    f = Frame.capture(NOW, Layout.of([], []), {}, {})
    assert f.values == b"" and f.quality == b""


def test_layout_names_are_made_once():
    """The names tuple is the same object on every read (writes look it up per frame)."""
    layout = Layout.of(["b", "a"], ["t"])
    assert layout.names is layout.names
    assert layout == Layout(("a", "b"), ("t",)) and hash(layout) == hash(
        Layout.of(["a", "b"], ["t"])
    )
