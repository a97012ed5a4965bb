"""AlarmState: the ISA-18.2 state derived from two facts, masks, and the journal form."""

from __future__ import annotations

import pytest

from edge.alarms.state import STATES, AlarmState


@pytest.mark.parametrize(
    ("active", "unack", "state"),
    [
        (False, False, "normal"),
        (True, True, "unacknowledged"),
        (True, False, "acknowledged"),
        (False, True, "returned_unacknowledged"),
    ],
)
def test_state_follows_active_and_unacknowledged(active, unack, state):
    """ISA-18.2 states come from 'active' and 'unacknowledged' (ANSI/ISA-18.2, from memory)."""
    assert AlarmState("a", "low", active=active, unacknowledged=unack).state == state


def test_out_of_service_takes_precedence_over_shelved_and_suppressed():
    """Out of service > shelved > suppressed > the life-cycle states."""
    s = AlarmState("a", "low", active=True, unacknowledged=True, suppressed=True)
    assert s.state == "suppressed"
    s = AlarmState("a", "low", suppressed=True, shelved_until=5.0)
    assert s.state == "shelved"
    s = AlarmState("a", "low", shelved_oneshot=True, out_of_service=True)
    assert s.state == "out_of_service"


def test_every_state_name_is_listed():
    """STATES lists exactly the eight names the API exposes (ISA-18.2 states)."""
    assert len(STATES) == 8 and {"returned_unacknowledged", "latched"} <= set(STATES)


def test_dict_round_trip_keeps_everything_but_rate_history():
    """to_dict/from_dict keep the state; rate history starts afresh."""
    s = AlarmState(
        "a",
        "high",
        active=True,
        unacknowledged=True,
        since=5.0,
        pending_since=1.0,
        shelved_until=99.0,
        reason="swap",
        user="alice",
        history=((1.0, 2.0),),
    )
    d = s.to_dict()
    assert d["state"] == "shelved" and "history" not in d
    back = AlarmState.from_dict(d)
    assert back == AlarmState(**{**{k: v for k, v in d.items() if k != "state"}})
    assert back.history == ()


def test_from_dict_ignores_unknown_keys():
    """A state written by a newer version with extra keys still loads."""
    assert AlarmState.from_dict({"name": "a", "priority": "low", "colour": "red"}).state == "normal"


def test_to_dict_is_every_field_but_history_plus_the_state():
    """to_dict holds what dataclasses.asdict holds, without history, with the state name."""
    from dataclasses import asdict

    from edge.alarms.state import AlarmState

    s = AlarmState("a", "high", active=True, value=2.0, reason="x", history=((1.0, 2.0),))
    expected = asdict(s)
    del expected["history"]
    assert s.to_dict() == {**expected, "state": "acknowledged"}
