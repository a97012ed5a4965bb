"""``engine.step`` with a ``Rest`` (the shortcut for resting point quality alarms) gives
what it gives without one, pass for pass, whatever the points, links, barometer and
operators do (checked on random runs through the whole pass: TagStore -> barometer ->
derive -> signals -> engine)."""

from __future__ import annotations

import math

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from edge import barometer as baro_mod
from edge import derive
from edge.alarms import engine
from edge.alarms.signals import signals_from
from edge.alarms.state import Action
from edge.errors import OperatorError
from edge.evaluation import compile_plan
from edge.model import GOOD, Sample, bad, uncertain
from edge.store import TagStore
from tests.unit.test_alarm_causes import GOOD_VALUES, config

TAGS = sorted(GOOD_VALUES)
QUALITIES = [GOOD, GOOD, GOOD, bad("comm_loss"), bad("sensor_fault"), uncertain("stale")]

tag_event = st.tuples(
    st.sampled_from(TAGS),
    st.sampled_from(["value", "quality", "silent"]),
    st.floats(-0.2, 0.2),
    st.sampled_from(range(len(QUALITIES))),
)
action = st.tuples(
    st.sampled_from(["ack", "shelve", "unshelve", "out_of_service", "in_service", "ack_priority"]),
    st.sampled_from(["drum-quality", "header-quality", "plc-comm", "gateway-comm", "medium"]),
)
step_ = st.tuples(
    st.lists(tag_event, max_size=4), st.floats(0.2, 3.0), st.one_of(st.none(), action)
)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(step_, min_size=5, max_size=40))
def test_rest_changes_nothing(steps) -> None:
    plan = compile_plan(config())
    store = TagStore(plan.stale_after)
    rest = engine.Rest()
    with_rest: dict = {}
    plain: dict = {}
    values = dict(GOOD_VALUES)
    quality = dict.fromkeys(TAGS, GOOD)
    silent: set[str] = set()
    now = 1_000_000.0
    window = derive.EMPTY_WINDOW
    for events_in, dt, act in steps:
        now += dt
        for tag, what, delta, qi in events_in:
            if what == "value":
                values[tag] = GOOD_VALUES[tag] * (1.0 + delta)
            elif what == "quality":
                quality[tag] = QUALITIES[qi]
            else:
                silent ^= {tag}
        batch = []
        for tag in TAGS:
            if tag in silent:
                continue
            q = quality[tag]
            batch.append(Sample(tag, values[tag] if q.level else math.nan, q, now, now))
        store.update(batch)
        snap = store.snapshot(now)
        reading = baro_mod.resolve(plan.barometer, snap, now)
        points, window = derive.step(plan.points, snap, reading, window, properties=False)
        signals = signals_from(
            points, snap, barometer=reading, sources=plan.source_tags, tags_of=plan.point_tags
        )
        with_rest, ev_a = engine.step(plan.alarms, with_rest, signals, now, rest)
        plain, ev_b = engine.step(plan.alarms, plain, signals, now)
        assert with_rest == plain
        assert ev_a == ev_b
        if act is not None:
            kind, alarm = act
            a = Action(kind, alarm, "ops", "checking", 60.0 if kind == "shelve" else None)
            with_rest, got_a = _act(plan.alarms, with_rest, a, now)
            plain, got_b = _act(plan.alarms, plain, a, now)
            assert got_a == got_b
            rest.clear()  # what Runtime.act does


def _act(defs, states, action, now):
    """The states after ``action`` and what it gave: its events, or its refusal."""
    try:
        states, events = engine.act(defs, states, action, now)
    except OperatorError as exc:
        return states, str(exc)
    return states, events
