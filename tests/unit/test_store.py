"""TagStore: the newest sample per tag, last good value kept as context, staleness on read."""

from __future__ import annotations

import math

from edge.model import GOOD, Sample, bad
from edge.store import TagStore


def test_a_bad_sample_carries_the_last_good_value_as_context():
    """After a good 5.0, a comm_loss sample keeps 5.0 as last_good and stays unusable."""
    store = TagStore()
    store.update([Sample("p", 5.0, GOOD, 1.0, 1.0)])
    store.update([Sample("p", math.nan, bad("comm_loss"), 2.0, 2.0)])
    s = store.get("p")
    assert s is not None and s.last_good == 5.0 and not s.usable


def test_snapshot_marks_an_old_sample_stale_and_keeps_its_value_as_context():
    """A sample older than stale_after reads as bad(stale) with its value as last_good."""
    store = TagStore({"p": 3.0, "t": 3.0})
    store.update([Sample("p", 5.0, GOOD, 1.0, 1.0), Sample("t", 400.0, GOOD, 3.5, 3.5)])
    snap = store.snapshot(now=5.0)
    assert snap["p"].quality == bad("stale") and snap["p"].last_good == 5.0
    assert snap["t"].value == 400.0 and snap["t"].quality == GOOD
    assert store.get("p").value == 5.0  # the store itself is unchanged


def test_snapshot_is_a_copy_that_later_updates_do_not_change():
    """A snapshot handed to an evaluation pass does not move under it."""
    store = TagStore()
    store.update([Sample("p", 5.0, GOOD, 1.0, 1.0)])
    snap = store.snapshot(now=1.0)
    store.update([Sample("p", 6.0, GOOD, 2.0, 2.0)])
    assert snap["p"].value == 5.0 and store.get("p").value == 6.0
