"""The service's garbage-collector policy (edge.service.garbage): the collector stays off
the evaluation pass, and cyclic garbage is still freed on the clock."""

from __future__ import annotations

import gc
import weakref

import pytest

from edge.service import garbage


class _Node:
    def __init__(self) -> None:
        self.other: _Node | None = None


def _cycle() -> weakref.ref[_Node]:
    a, b = _Node(), _Node()
    a.other, b.other = b, a  # only the cycle collector can free these
    return weakref.ref(a)


@pytest.fixture
def restore_gc():
    before = gc.get_threshold()
    yield
    gc.unfreeze()
    gc.set_threshold(*before)


def test_settle_freezes_and_raises_the_threshold(restore_gc) -> None:
    garbage.settle()
    assert gc.get_threshold()[0] == garbage.YOUNG_THRESHOLD
    assert gc.get_freeze_count() > 0


def test_a_pass_worth_of_churn_does_not_trigger_the_collector(restore_gc) -> None:
    """60,000 short-lived containers (one pass at 10,000 tags) and not one collection."""
    garbage.settle()
    runs = []
    gc.callbacks.append(lambda phase, info: runs.append(info) if phase == "start" else None)
    try:
        for _ in range(5):  # five passes, each replacing the last one's objects
            batch = [{"value": float(i)} for i in range(60_000)]
            del batch
    finally:
        gc.callbacks.pop()
    assert runs == []


def test_pacer_collects_young_cycles_every_ten_seconds(restore_gc) -> None:
    garbage.settle()
    pacer = garbage.Pacer()
    assert pacer.tick(1000.0) == -1  # the first tick only starts the clock
    ref = _cycle()
    assert pacer.tick(1005.0) == -1
    assert ref() is not None  # nothing collected yet: the cycle is still there
    assert pacer.tick(1010.0) == 1
    assert ref() is None


def test_pacer_runs_a_full_collection_every_five_minutes(restore_gc) -> None:
    garbage.settle()
    pacer = garbage.Pacer()
    pacer.tick(0.0)
    keep = _Node()
    keep.other = _Node()
    keep.other.other = keep
    ref = weakref.ref(keep)
    gc.collect(1)  # alive: it ages into the oldest generation, which young passes never see
    del keep
    kinds = [pacer.tick(t) for t in range(10, 300, 10)]
    assert set(kinds) == {1}
    assert ref() is not None
    assert pacer.tick(300.0) == 2
    assert ref() is None


def test_pacer_survives_a_clock_step_back(restore_gc) -> None:
    pacer = garbage.Pacer()
    pacer.tick(5000.0)
    assert pacer.tick(100.0) == 2  # the wall clock went back: collect and start over
    assert pacer.tick(105.0) == -1
