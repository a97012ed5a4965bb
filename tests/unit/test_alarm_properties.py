"""The alarm engine over random values, qualities, operator actions and time steps: the
ISA-18.2 invariants hold after every move (ANSI/ISA-18.2-2016 / IEC 62682, from memory)."""

from __future__ import annotations

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from edge.alarms.definitions import AlarmDef
from edge.alarms.engine import STATES, Action, AlarmState, act, step
from edge.errors import OperatorError
from edge.model import GOOD, Reading, bad, uncertain

QUALITIES = (GOOD, GOOD, GOOD, uncertain("stale"), bad("comm_loss"))
ANNOUNCING = {"raised", "realarm"}
ACTIONS = ("ack", "shelve", "shelve1", "unshelve", "out_of_service", "in_service")


def definition(latch: bool, on_delay: float, off_delay: float, deadband: float) -> AlarmDef:
    return AlarmDef(
        name="a",
        signal="x",
        kind="high",
        priority="high",
        limit=60.0,
        deadband=deadband,
        on_delay=on_delay,
        off_delay=off_delay,
        latch=latch,
        realarm=20.0,
        max_shelve=50.0,
    )


moves = st.lists(
    st.one_of(
        st.tuples(
            st.just("step"),
            st.floats(min_value=0.0, max_value=5.0),  # time step
            st.floats(min_value=50.0, max_value=70.0),  # value
            st.sampled_from(QUALITIES),
        ),
        st.tuples(
            st.just("act"),
            st.floats(min_value=0.0, max_value=5.0),
            st.sampled_from(ACTIONS),
            st.just(None),
        ),
    ),
    min_size=1,
    max_size=40,
)


def check(d: AlarmDef, before: AlarmState | None, s: AlarmState, events: list, good: bool) -> None:
    assert s.state in STATES
    # nothing waits for acknowledgement behind a mask; a latch only holds an active alarm
    assert not (s.masked and s.unacknowledged)
    assert not s.latched or (s.active and d.latch)
    assert (s.active_since is not None) == s.active
    for e in events:
        assert e.state in STATES
        assert e.kind != "acknowledged" or e.user is not None  # no acknowledgement nobody made
        if e.kind in ANNOUNCING:
            assert not s.masked and e.state in ("unacknowledged", "latched")
            assert s.active and s.in_message is not None
    if before is not None and not good:
        # bad or uncertain input never raises or clears a process alarm
        assert not any(e.kind in ("raised", "cleared") for e in events)
        assert s.active == before.active
    if before is not None and s.state != before.state:
        assert s.since is not None
    kinds = [e.kind for e in events]
    assert kinds.count("raised") <= 1


@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(
    latch=st.booleans(),
    on_delay=st.sampled_from((0.0, 2.0, 5.0)),
    off_delay=st.sampled_from((0.0, 3.0)),
    deadband=st.sampled_from((0.0, 2.0)),
    moves=moves,
)
def test_isa_18_2_invariants_hold_over_random_moves(latch, on_delay, off_delay, deadband, moves):
    """Random plant values, qualities, actions and time steps never break the invariants:
    a valid state, nothing unacknowledged behind a mask, announcements only unmasked, bad
    data neither raises nor clears, one event per change (no phantom acknowledgement)."""
    d = definition(latch, on_delay, off_delay, deadband)
    defs = {"a": d}
    states: dict[str, AlarmState] = {}
    t = 0.0
    for kind, dt, what, quality in moves:
        t += dt
        before = states.get("a")
        if kind == "step":
            states, events = step(defs, states, {"x": Reading(what, quality)}, t)
            s = states["a"]
            check(d, before, s, events, quality.good)
            # a one-shot shelve never outlives the alarm's return to normal (the defect of a
            # latched alarm shelved after its condition had gone)
            assert not s.shelved_oneshot or s.active or s.pending_since is not None
            continue
        action = {
            "shelve": Action("shelve", "a", "op", "test", 30.0),
            "shelve1": Action("shelve", "a", "op", "test", None),
        }.get(what, Action(what, "a", "op", "test"))
        try:
            states, events = act(defs, states, action, t)
        except OperatorError:
            assert states.get("a") == before  # a refused action changes nothing
            continue
        s = states["a"]
        check(d, None, s, events, True)
        assert len(events) <= 2  # ack of a latched alarm: acknowledged + cleared, no more
        if what in ("unshelve", "in_service"):
            assert [e.kind for e in events] in (["unshelved"], ["in_service"])
            assert events[0].state == s.state


@settings(max_examples=100, deadline=None)
@given(values=st.lists(st.floats(min_value=55.0, max_value=65.0), min_size=1, max_size=30))
def test_a_standing_alarm_keeps_what_it_came_in_with(values):
    """Whatever the value does while the alarm stands, value, limit and message at
    activation stay as they were."""
    d = definition(False, 0.0, 0.0, 10.0)  # deadband 10: it stands for the whole range
    states, _ = step({"a": d}, {}, {"x": Reading(61.0, GOOD)}, 0.0)
    first = states["a"]
    for i, v in enumerate(values, start=1):
        states, _ = step({"a": d}, states, {"x": Reading(v, GOOD)}, float(i))
        s = states["a"]
        assert s.active
        assert (s.in_value, s.in_limit, s.in_message, s.active_since) == (
            61.0,
            60.0,
            first.in_message,
            0.0,
        )
