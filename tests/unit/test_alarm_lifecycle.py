"""The ISA-18.2 alarm life cycle, one transition per test (ANSI/ISA-18.2-2016 / IEC 62682
state model, from memory: normal, unacknowledged, acknowledged, returned-to-normal
unacknowledged, latched, shelved, suppressed by design, out of service). Each test is named
after the transition it drives; time is passed explicitly."""

from __future__ import annotations

import pytest

from edge.alarms.definitions import AlarmDef
from edge.alarms.engine import Action, AlarmState, act, step
from edge.errors import OperatorError
from edge.model import GOOD, Reading, bad


def alarm(**kw: object) -> AlarmDef:
    fields: dict[str, object] = {
        "name": "a",
        "signal": "x",
        "kind": "high",
        "priority": "critical",
        "limit": 60.0,
        "unit": "K",
        "unit_kind": "tdiff",
        "unit_label": "K",
        "max_shelve": 8 * 3600.0,
    }
    fields.update(kw)
    return AlarmDef(**fields)  # type: ignore[arg-type]


class Desk:
    """One alarm, fed values and operator actions over time."""

    def __init__(self, d: AlarmDef | None = None) -> None:
        self.d = d or alarm()
        self.defs = {"a": self.d}
        self.states: dict[str, AlarmState] = {}
        self.events: list = []
        self.journal: list = []

    def at(self, t: float, x: float | None, quality=GOOD) -> list[str]:
        signals = {"x": Reading(x, quality)}
        self.states, self.events = step(self.defs, self.states, signals, t)
        self.journal += self.events
        return [e.kind for e in self.events]

    def do(self, t: float, kind: str, **kw: object) -> list[str]:
        action = Action(kind=kind, alarm="a", user=str(kw.pop("user", "alice")), **kw)  # type: ignore[arg-type]
        self.states, self.events = act(self.defs, self.states, action, t)
        self.journal += self.events
        return [e.kind for e in self.events]

    @property
    def s(self) -> AlarmState:
        return self.states["a"]


# --- A normal -> B unacknowledged: on-delay on the raw comparison ---------------------


def test_normal_to_unacknowledged_on_delay_restarts_when_the_raw_value_drops_below_the_limit():
    """61 for 0.4 s then 57 (inside a 5 K deadband) does not raise a 60 / 3 s on-delay alarm:
    the on-delay runs on value > limit, the deadband only applies to the return."""
    d = Desk(alarm(on_delay=3.0, deadband=5.0))
    d.at(0.0, 61.0)
    d.at(0.4, 57.0)
    for t in (1.0, 2.0, 3.0, 3.5, 5.0):
        assert d.at(t, 57.0) == []
    assert d.s.state == "normal"


def test_normal_to_unacknowledged_after_the_on_delay_of_continuous_excursion():
    """Above the limit continuously for the on-delay raises, not before."""
    d = Desk(alarm(on_delay=3.0, deadband=5.0))
    assert d.at(0.0, 61.0) == []
    assert d.at(2.9, 61.0) == []
    assert d.at(3.0, 61.0) == ["raised"]


# --- B/C -> normal/D: off-delay on the return past the deadband ------------------------


def test_acknowledged_to_normal_off_delay_restarts_when_the_value_enters_the_deadband():
    """An off-delay needs the value back below limit - deadband for its whole length: a
    return to inside the deadband restarts it."""
    d = Desk(alarm(off_delay=3.0, deadband=5.0))
    d.at(0.0, 70.0)
    d.do(0.5, "ack")
    d.at(1.0, 50.0)  # below 55: off-delay starts
    d.at(2.0, 58.0)  # inside the deadband: not returned
    assert d.at(4.5, 50.0) == []  # the off-delay started again at 4.5
    assert d.at(7.4, 50.0) == []
    assert d.at(7.5, 50.0) == ["cleared"]
    assert d.s.state == "normal"


def test_unacknowledged_to_returned_unacknowledged_when_the_condition_returns():
    """An unacknowledged alarm whose condition returns waits for acknowledgement."""
    d = Desk()
    d.at(0.0, 61.0)
    assert d.at(1.0, 50.0) == ["cleared"]
    assert d.s.state == "returned_unacknowledged"
    assert d.do(2.0, "ack") == ["acknowledged"]
    assert d.s.state == "normal"


# --- latched -------------------------------------------------------------------------


def test_acknowledged_to_latched_when_the_condition_of_a_latching_alarm_returns():
    """A latching alarm whose condition returns shows the state 'latched' until reset."""
    d = Desk(alarm(latch=True))
    d.at(0.0, 61.0)
    d.do(1.0, "ack")
    d.at(2.0, 50.0)
    assert (d.s.state, d.s.active, d.s.latched, d.s.condition) == ("latched", True, True, False)


def test_latched_to_normal_on_reset():
    """Acknowledging (resetting) a latched alarm returns it to normal."""
    d = Desk(alarm(latch=True))
    d.at(0.0, 61.0)
    d.do(1.0, "ack")
    d.at(2.0, 50.0)
    assert d.do(3.0, "ack") == ["cleared"]
    assert d.s.state == "normal"


# --- shelving ------------------------------------------------------------------------


def test_latched_to_shelved_one_shot_ends_at_once_and_the_next_activation_is_announced():
    """Regression: a one-shot shelve of a latched alarm that has already returned to
    normal ends (returned to normal) and does not hide the next activation."""
    d = Desk(alarm(latch=True))
    d.at(0.0, 61.0)
    d.at(1.0, 50.0)
    assert d.s.state == "latched"
    assert d.do(2.0, "shelve", comment="noisy switch") == ["shelved"]
    assert d.at(3.0, 50.0) == ["unshelved"]
    assert d.s.state == "normal" and not d.s.shelved
    assert d.at(4.0, 61.0) == ["raised"]
    assert d.s.state == "unacknowledged"


def test_unacknowledged_to_shelved_one_shot_ends_when_the_alarm_returns_to_normal():
    """A one-shot shelve of an active alarm lasts until it returns to normal."""
    d = Desk()
    d.at(0.0, 61.0)
    d.do(1.0, "shelve", comment="known")
    assert d.at(2.0, 62.0) == []
    assert d.at(3.0, 50.0) == ["unshelved"]
    assert d.at(4.0, 61.0) == ["raised"]


def test_shelved_one_shot_ends_after_the_longest_shelve_the_philosophy_allows():
    """A one-shot shelve of an alarm that never clears ends at max_shelve and announces."""
    d = Desk(alarm(max_shelve=600.0))
    d.at(0.0, 61.0)
    d.do(1.0, "shelve", comment="known")
    assert d.at(600.0, 61.0) == []
    assert d.at(601.0, 61.0) == ["shelve_expired"]
    assert d.s.state == "unacknowledged"


@pytest.mark.parametrize(
    ("lift", "kind"),
    [
        (lambda d: d.do(5.0, "unshelve"), "unshelved"),
        (lambda d: d.at(31.0, 61.0), "shelve_expired"),
    ],
)
def test_shelved_to_unacknowledged_when_lifted_while_active_journals_one_event(lift, kind):
    """Unshelving or a shelve expiring while the alarm is active journals one event, in
    state unacknowledged: no 'acknowledged' nobody made, no second 'raised'."""
    d = Desk()
    d.at(0.0, 61.0)
    d.do(1.0, "shelve", comment="work", duration=30.0)
    d.at(2.0, 61.0)
    before = len(d.journal)
    assert lift(d) == [kind]
    new = d.journal[before:]
    assert [(e.kind, e.state) for e in new] == [(kind, "unacknowledged")]
    assert all(e.state != "acknowledged" for e in d.journal)


def test_out_of_service_to_unacknowledged_on_return_to_service_journals_one_event():
    """Return to service of an active alarm: one in_service event, announced again."""
    d = Desk()
    d.at(0.0, 61.0)
    d.do(1.0, "out_of_service", comment="transmitter swap")
    d.at(2.0, 61.0)
    assert d.do(3.0, "in_service") == ["in_service"]
    assert (d.events[0].state, d.s.unacknowledged) == ("unacknowledged", True)


def test_shelving_a_not_shelvable_alarm_is_refused_with_the_rule():
    """The philosophy forbids shelving: the refusal names the rule and nothing changes."""
    d = Desk(alarm(shelvable=False, not_shelvable_why="critical alarms are not shelved"))
    d.at(0.0, 61.0)
    with pytest.raises(OperatorError, match="may not be shelved: critical alarms"):
        d.do(1.0, "shelve", comment="x", duration=60.0)
    assert d.s.state == "unacknowledged"


def test_shelve_longer_than_the_philosophy_allows_is_refused():
    """A timed shelve beyond max_shelve is refused, naming the limit."""
    d = Desk(alarm(max_shelve=3600.0))
    with pytest.raises(OperatorError, match=r"at most 1 h \(alarm_philosophy.max_shelve\)"):
        d.do(0.0, "shelve", comment="x", duration=7200.0)


# --- what happened, kept -------------------------------------------------------------


def test_a_standing_alarm_keeps_its_value_limit_and_message_at_activation():
    """Time in, value, limit and the message rendered then stay while the live value moves;
    the acknowledgement is kept apart from the time in."""
    d = Desk(alarm(deadband=5.0))
    d.at(10.0, 61.5)
    message = d.s.in_message
    assert message == "x high: 61.5 K (limit 60 K)"
    d.do(12.0, "ack", user="bob")
    d.at(13.0, 70.25)
    d.at(14.0, 58.0)
    s = d.s
    assert (s.active_since, s.in_value, s.in_limit, s.in_message) == (10.0, 61.5, 60.0, message)
    assert (s.ack_time, s.ack_user, s.value) == (12.0, "bob", 58.0)


def test_a_quality_alarm_keeps_the_reason_that_raised_it():
    """A quality alarm waiting for acknowledgement still says why it came in."""
    d = Desk(alarm(kind="quality", limit=None, message="x data quality: {quality}"))
    d.at(0.0, None, bad("sensor_fault"))
    d.at(1.0, 5.0)
    s = d.s
    assert s.state == "returned_unacknowledged" and s.quality == "good"
    assert s.in_quality == "bad(sensor_fault)"
    assert s.in_message == "x data quality: bad(sensor_fault)"


def test_the_saturation_alarm_message_carries_the_hint_given_when_it_came_in():
    """The built-in saturation alarm's message, rendered at activation, ends with the
    point's commissioning hint, and keeps it after the hint goes."""
    from edge.alarms.signals import Signals

    d = alarm(
        name="drum-saturation",
        signal="drum.deviation",
        limit=2.0,
        builtin="saturation",
        subject="drum",
        message="Point drum is {value} {unit} away from saturation (tolerance {limit} {unit})",
    )
    hint = "the temperature agrees if drum_p reads gauge pressure: set reference: gauge"
    defs = {d.name: d}
    sig = Signals({"drum.deviation": Reading(7.5, GOOD)}, {"drum": hint})
    states, events = step(defs, {}, sig, 0.0)
    assert events[0].message == (
        f"Point drum is 7.5 K away from saturation (tolerance 2 K). {hint}"
    )
    states, _ = step(defs, states, Signals({"drum.deviation": Reading(7.0, GOOD)}), 1.0)
    assert states[d.name].in_message == events[0].message
