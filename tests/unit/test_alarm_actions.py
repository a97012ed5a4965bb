"""Operator actions: acknowledge, shelve (timed and one-shot), unshelve, out of service and
return to service; each records who and why. Time is passed explicitly."""

from __future__ import annotations

import pytest

from edge.alarms.definitions import AlarmDef
from edge.alarms.engine import Action, AlarmState, act, step
from edge.errors import OperatorError, UnknownAlarm
from edge.model import GOOD, Reading


def alarm(name: str = "a", priority: str = "high", **kw: object) -> AlarmDef:
    fields: dict[str, object] = {
        "name": name,
        "signal": "x",
        "kind": "high",
        "priority": priority,
        "limit": 100.0,
    }
    fields.update(kw)
    return AlarmDef(**fields)  # type: ignore[arg-type]


class Desk:
    """One alarm (or a few) with the plant value and operator actions over time."""

    def __init__(self, *defs: AlarmDef) -> None:
        self.defs = {d.name: d for d in defs or (alarm(),)}
        self.states: dict[str, AlarmState] = {}
        self.events: list = []

    def at(self, t: float, x: float) -> list[str]:
        self.states, self.events = step(self.defs, self.states, {"x": Reading(x, GOOD)}, t)
        return [e.kind for e in self.events]

    def do(self, t: float, kind: str, alarm: str = "a", **kw: object) -> list[str]:
        action = Action(kind=kind, alarm=alarm, user=str(kw.pop("user", "alice")), **kw)  # type: ignore[arg-type]
        self.states, self.events = act(self.defs, self.states, action, t)
        return [e.kind for e in self.events]

    @property
    def s(self) -> AlarmState:
        return self.states["a"]


def test_ack_moves_unacknowledged_to_acknowledged():
    """ISA-18.2: unacknowledged -> acknowledged on an operator acknowledgement."""
    d = Desk()
    d.at(0, 101)
    assert d.do(5, "ack", comment="seen") == ["acknowledged"]
    e = d.events[0]
    assert (e.user, e.comment, e.state) == ("alice", "seen", "acknowledged")
    assert d.s.since == 5 and d.s.user == "alice"


def test_ack_of_returned_unacknowledged_goes_to_normal():
    """ISA-18.2: returned-unacknowledged -> normal on acknowledgement."""
    d = Desk()
    d.at(0, 101)
    d.at(1, 99)
    d.do(2, "ack")
    assert d.s.state == "normal"


def test_ack_of_an_acknowledged_alarm_is_refused():
    """Acknowledging twice is an operator error, not a second event."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "ack")
    with pytest.raises(OperatorError, match="already acknowledged"):
        d.do(2, "ack")


def test_ack_of_a_normal_alarm_is_refused():
    """A normal alarm has nothing to acknowledge."""
    d = Desk()
    d.at(0, 50)
    with pytest.raises(OperatorError, match="not in alarm"):
        d.do(1, "ack")


def test_ack_of_an_unknown_alarm_raises_unknown_alarm():
    """An action naming no defined alarm raises UnknownAlarm."""
    with pytest.raises(UnknownAlarm):
        Desk().do(0, "ack", alarm="nope")


def test_action_needs_a_user():
    """Every action records who did it: an empty user is refused."""
    d = Desk()
    d.at(0, 101)
    with pytest.raises(OperatorError, match="user"):
        d.do(1, "ack", user=" ")


def test_unknown_action_is_refused():
    """An action kind outside the list is an operator error."""
    with pytest.raises(OperatorError, match="unknown action"):
        Desk().do(0, "silence")


def test_ack_of_a_latched_alarm_after_return_resets_it():
    """Acknowledging a latched alarm whose condition has cleared resets it to normal."""
    d = Desk(alarm(latch=True))
    d.at(0, 101)
    d.at(1, 50)
    assert d.do(2, "ack") == ["acknowledged", "cleared"]
    assert d.events[1].user == "alice" and d.s.state == "normal"


def test_ack_of_a_latched_alarm_still_in_alarm_keeps_it_latching():
    """A latched alarm acknowledged while its condition stands latches when it clears."""
    d = Desk(alarm(latch=True))
    d.at(0, 101)
    d.do(1, "ack")
    d.at(2, 50)
    assert d.s.state == "latched" and d.s.latched
    assert d.do(3, "ack") == ["cleared"]
    assert d.s.state == "normal"


def test_ack_priority_acknowledges_every_alarm_of_that_priority():
    """ack_priority acknowledges all unacknowledged alarms of one priority, no others."""
    d = Desk(alarm("a", "high"), alarm("b", "high"), alarm("c", "low"))
    d.at(0, 101)
    assert d.do(1, "ack_priority", alarm="high") == ["acknowledged", "acknowledged"]
    assert [d.states[n].state for n in "abc"] == ["acknowledged", "acknowledged", "unacknowledged"]


def test_ack_priority_with_nothing_to_acknowledge_is_quiet():
    """ack_priority with no matching unacknowledged alarm changes nothing and says nothing."""
    d = Desk()
    d.at(0, 50)
    assert d.do(1, "ack_priority", alarm="critical") == []


def test_ack_priority_refuses_an_unknown_priority():
    """ack_priority takes critical, high, medium or low."""
    with pytest.raises(OperatorError, match="priority"):
        Desk().do(0, "ack_priority", alarm="urgent")


def test_shelve_records_who_why_and_for_how_long():
    """A timed shelve masks the alarm and records user, reason and duration."""
    d = Desk()
    d.at(0, 101)
    assert d.do(10, "shelve", comment="sensor swap", duration=1800.0) == ["shelved"]
    e = d.events[0]
    assert (e.user, e.comment, e.state) == ("alice", "sensor swap", "shelved")
    assert e.message == "a shelved for 30 min by alice: sensor swap"
    assert d.s.shelved_until == 1810.0 and not d.s.unacknowledged


def test_shelved_alarm_does_not_announce():
    """A shelved alarm does not raise or clear, though its condition comes and goes."""
    d = Desk()
    d.do(0, "shelve", comment="maintenance", duration=600.0)
    assert d.at(1, 101) == []
    assert d.at(2, 50) == []
    assert d.at(3, 101) == []
    assert d.s.active and d.s.state == "shelved"


def test_shelve_expiry_announces_a_standing_alarm():
    """At expiry a shelved alarm whose condition stands is raised again."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "shelve", comment="maintenance", duration=60.0)
    assert d.at(60.9, 101) == []
    assert d.at(61, 101) == ["shelve_expired"]  # one event announces it again
    assert d.s.state == "unacknowledged"


def test_shelve_expiry_of_a_normal_alarm_returns_to_normal():
    """A shelve that expires with the condition gone leaves the alarm normal."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "shelve", comment="maintenance", duration=60.0)
    d.at(30, 50)
    assert d.at(61, 50) == ["shelve_expired"]
    assert d.s.state == "normal"


def test_shelve_needs_a_reason():
    """Shelving without a reason is refused."""
    with pytest.raises(OperatorError, match="reason"):
        Desk().do(0, "shelve", duration=60.0)


def test_shelve_needs_a_positive_duration():
    """A zero or negative shelve duration is refused."""
    with pytest.raises(OperatorError, match="positive"):
        Desk().do(0, "shelve", comment="x", duration=0.0)


def test_one_shot_shelve_ends_when_the_alarm_clears():
    """ISA-18.2 one-shot shelving: the alarm is unshelved when it returns to normal."""
    d = Desk()
    d.at(0, 101)
    assert d.do(1, "shelve", comment="known fault") == ["shelved"]
    assert d.s.shelved_oneshot and d.s.state == "shelved"
    assert d.at(2, 101) == []
    assert d.at(3, 50) == ["unshelved"]
    assert d.s.state == "normal"
    assert d.at(4, 101) == ["raised"]


def test_one_shot_shelve_needs_an_active_alarm():
    """A one-shot shelve of an alarm that is not active is refused."""
    with pytest.raises(OperatorError, match="one-shot"):
        Desk().do(0, "shelve", comment="x")


def test_unshelve_announces_a_standing_alarm():
    """Unshelving an alarm whose condition stands raises it."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "shelve", comment="x", duration=600.0)
    assert d.do(2, "unshelve", user="bob") == ["unshelved"]  # one event, no phantom ack
    assert d.events[0].user == "bob"


def test_unshelve_with_the_condition_gone_is_normal():
    """ISA-18.2: shelved -> normal on unshelve when the condition cleared meanwhile."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "shelve", comment="x", duration=600.0)
    assert d.at(2, 50) == []
    assert d.do(3, "unshelve") == ["unshelved"]
    assert (d.s.state, d.s.active, d.s.unacknowledged) == ("normal", False, False)


def test_unshelve_of_an_alarm_not_shelved_is_refused():
    """Unshelve needs a shelved alarm."""
    with pytest.raises(OperatorError, match="not shelved"):
        Desk().do(0, "unshelve")


def test_out_of_service_masks_the_alarm_and_records_why():
    """Out of service: no announcement; user and reason are recorded."""
    d = Desk()
    assert d.do(0, "out_of_service", comment="transmitter removed") == ["out_of_service"]
    assert d.events[0].comment == "transmitter removed"
    assert d.at(1, 101) == []
    assert d.s.state == "out_of_service" and d.s.reason == "transmitter removed"


def test_out_of_service_needs_a_reason():
    """Taking an alarm out of service without a reason is refused."""
    with pytest.raises(OperatorError, match="reason"):
        Desk().do(0, "out_of_service")


def test_out_of_service_ends_a_shelve():
    """Out of service replaces a shelve (it takes precedence)."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "shelve", comment="x", duration=60.0)
    d.do(2, "out_of_service", comment="y")
    assert not d.s.shelved and d.at(61, 101) == []


def test_shelve_of_an_out_of_service_alarm_is_refused():
    """An out-of-service alarm cannot be shelved."""
    d = Desk()
    d.do(0, "out_of_service", comment="y")
    with pytest.raises(OperatorError, match="out of service"):
        d.do(1, "shelve", comment="x", duration=60.0)


def test_return_to_service_announces_a_standing_alarm():
    """Returning to service with the condition standing raises the alarm."""
    d = Desk()
    d.do(0, "out_of_service", comment="y")
    d.at(1, 101)
    assert d.do(2, "in_service") == ["in_service"]  # one event, no phantom ack
    assert d.s.state == "unacknowledged"


def test_return_to_service_with_the_condition_gone_is_normal():
    """ISA-18.2: out of service -> normal when returned with the condition gone."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "out_of_service", comment="transmitter removed")
    d.at(2, 50)
    assert d.do(3, "in_service", comment="refitted") == ["in_service"]
    assert (d.s.state, d.s.active, d.s.unacknowledged) == ("normal", False, False)
    assert d.events[0].comment == "refitted" and d.s.user == "alice"


def test_return_to_service_of_an_alarm_in_service_is_refused():
    """in_service needs an out-of-service alarm."""
    with pytest.raises(OperatorError, match="not out of service"):
        Desk().do(0, "in_service")


def test_ack_of_a_shelved_alarm_is_refused():
    """A shelved alarm has nothing to acknowledge."""
    d = Desk()
    d.at(0, 101)
    d.do(1, "shelve", comment="x", duration=60.0)
    with pytest.raises(OperatorError, match="shelved"):
        d.do(2, "ack")
