"""The alarm engine's process side: limits, deadband, delays, latch, hold on bad quality,
rate, deviation, pressure references, suppression, re-alarm. Time is passed explicitly."""

from __future__ import annotations

import subprocess
import sys
from dataclasses import replace

from edge.alarms.definitions import AlarmDef, Suppress
from edge.alarms.engine import AlarmState, Signals, carry_over, step
from edge.model import GOOD, Reading, bad, uncertain


def alarm(kind: str = "high", limit: float = 100.0, **kw: object) -> AlarmDef:
    fields: dict[str, object] = {
        "name": "a",
        "signal": "x",
        "kind": kind,
        "priority": "high",
        "limit": limit,
        "unit": "K",
        "unit_kind": "tdiff",
        "unit_label": "K",
    }
    fields.update(kw)
    return AlarmDef(**fields)  # type: ignore[arg-type]


def good(v: float) -> Reading:
    return Reading(v, GOOD)


class Run:
    """Feeds one alarm step by step; keeps its state and the events of the last step."""

    def __init__(self, d: AlarmDef, state: AlarmState | None = None) -> None:
        self.defs = {d.name: d}
        self.states = {d.name: state} if state else {}
        self.events: list = []

    def at(self, t: float, x: float | Reading | None = None, **signals: Reading) -> list[str]:
        sig = dict(signals)
        if x is not None:
            sig["x"] = x if isinstance(x, Reading) else good(x)
        self.states, self.events = step(self.defs, self.states, sig, t)
        return [e.kind for e in self.events]

    @property
    def s(self) -> AlarmState:
        return self.states["a"]


def test_high_raises_above_limit():
    """A high alarm raises once the value is above its limit, unacknowledged."""
    r = Run(alarm())
    assert r.at(0, 100.5) == ["raised"]
    e = r.events[0]
    assert (e.value, e.limit, e.state, e.priority) == (100.5, 100.0, "unacknowledged", "high")


def test_value_at_limit_does_not_raise():
    """A value equal to a high limit is not beyond it."""
    r = Run(alarm())
    assert r.at(0, 100.0) == []
    assert r.s.state == "normal"


def test_high_deadband_holds_until_below_limit_minus_deadband():
    """With a 2 K deadband a 100 K high alarm clears only below 98 K."""
    r = Run(alarm(deadband=2.0))
    r.at(0, 101)
    assert r.at(1, 99.0) == []
    assert r.at(2, 98.0) == []  # 98 is not below 98
    assert r.at(3, 97.9) == ["cleared"]


def test_deadband_does_not_lower_the_raise_point():
    """The deadband widens the clear point only: 99 K does not raise a 100 K alarm."""
    r = Run(alarm(deadband=2.0))
    assert r.at(0, 99.0) == []


def test_low_deadband_clears_above_limit_plus_deadband():
    """A low alarm at 25 K with 2 K deadband raises below 25 and clears above 27."""
    r = Run(alarm("low", 25.0, deadband=2.0))
    assert r.at(0, 24.9) == ["raised"]
    assert r.at(1, 26.5) == []
    assert r.at(2, 27.1) == ["cleared"]


def test_low_low_and_high_high_compare_like_low_and_high():
    """low_low and high_high use the same comparisons as low and high."""
    assert Run(alarm("low_low", 10.0)).at(0, 9.0) == ["raised"]
    assert Run(alarm("high_high", 10.0)).at(0, 11.0) == ["raised"]


def test_on_delay_waits_for_the_condition_to_stand():
    """With a 10 s on-delay the alarm raises at 10 s of continuous condition, not before."""
    r = Run(alarm(on_delay=10.0))
    assert r.at(0, 101) == []
    assert r.at(9.9, 101) == []
    assert r.at(10.0, 101) == ["raised"]


def test_on_delay_restarts_when_the_condition_drops():
    """A condition that drops during the on-delay starts the delay afresh."""
    r = Run(alarm(on_delay=10.0))
    r.at(0, 101)
    r.at(5, 99)
    r.at(6, 101)
    assert r.at(15, 101) == []
    assert r.at(16, 101) == ["raised"]


def test_off_delay_waits_for_the_condition_to_be_gone():
    """With a 5 s off-delay the alarm clears after 5 s of continuous normal value."""
    r = Run(alarm(off_delay=5.0))
    r.at(0, 101)
    assert r.at(1, 99) == []
    assert r.s.active
    assert r.at(5.9, 99) == []
    assert r.at(6.0, 99) == ["cleared"]


def test_off_delay_cancelled_when_the_condition_returns():
    """A condition back during the off-delay keeps the alarm active and restarts the delay."""
    r = Run(alarm(off_delay=5.0))
    r.at(0, 101)
    r.at(1, 99)
    r.at(3, 101)
    r.at(4, 99)
    assert r.at(8.5, 99) == []
    assert r.at(9.0, 99) == ["cleared"]


def test_transition_normal_to_unacknowledged():
    """ISA-18.2: normal -> unacknowledged when the alarm activates."""
    r = Run(alarm())
    r.at(0, 99)
    assert r.s.state == "normal"
    r.at(1, 101)
    assert (r.s.active, r.s.unacknowledged, r.s.state) == (True, True, "unacknowledged")


def test_transition_unacknowledged_to_returned_unacknowledged():
    """ISA-18.2: unacknowledged -> returned-unacknowledged when it clears before an ack."""
    r = Run(alarm())
    r.at(0, 101)
    assert r.at(1, 99) == ["cleared"]
    assert r.events[0].state == "returned_unacknowledged"
    assert (r.s.active, r.s.unacknowledged) == (False, True)


def test_transition_acknowledged_to_normal():
    """ISA-18.2: acknowledged -> normal when an acknowledged alarm clears."""
    r = Run(alarm(), AlarmState("a", "high", active=True, condition=True))
    assert r.s.state == "acknowledged"
    assert r.at(0, 99) == ["cleared"]
    assert r.s.state == "normal"


def test_transition_returned_unacknowledged_back_to_unacknowledged():
    """ISA-18.2: a returned-unacknowledged alarm that activates again is unacknowledged."""
    r = Run(alarm())
    r.at(0, 101)
    r.at(1, 99)
    assert r.at(2, 101) == ["raised"]
    assert r.s.state == "unacknowledged"


def test_since_is_the_time_of_the_last_state_change():
    """``since`` moves when the state changes, not on every step."""
    r = Run(alarm())
    r.at(0, 101)
    r.at(5, 102)
    assert r.s.since == 0
    r.at(7, 99)
    assert r.s.since == 7


def test_latched_alarm_stays_active_after_its_condition_clears():
    """A latched alarm does not clear by itself when the value returns to normal."""
    r = Run(alarm(latch=True))
    r.at(0, 101)
    assert r.at(1, 50) == []
    assert (r.s.active, r.s.latched, r.s.state) == (True, True, "latched")
    assert r.at(100, 50) == []


def test_latched_alarm_condition_returning_unlatches_without_new_raise():
    """A latched alarm whose condition comes back is active again with no second raise."""
    r = Run(alarm(latch=True))
    r.at(0, 101)
    r.at(1, 50)
    assert r.at(2, 101) == []
    assert (r.s.active, r.s.latched) == (True, False)


def test_latch_dropped_by_reload_clears_a_latched_alarm():
    """An alarm latched under an old definition clears once its definition has no latch."""
    r = Run(alarm(latch=True))
    r.at(0, 101)
    r.at(1, 50)
    r.defs = {"a": alarm(latch=False)}
    assert r.at(2, 50) == ["cleared"]


def test_bad_input_never_clears_an_active_alarm():
    """Bad data holds an active alarm active (the quality alarm speaks instead)."""
    r = Run(alarm())
    r.at(0, 101)
    assert r.at(1, Reading(None, bad("comm_loss"))) == []
    assert r.s.active and r.s.value is None and r.s.quality == "bad(comm_loss)"


def test_bad_input_never_raises():
    """Bad data never raises an alarm, even with a last value beyond the limit."""
    r = Run(alarm())
    assert r.at(0, Reading(500.0, bad("stale"))) == []
    assert not r.s.active


def test_uncertain_input_holds_the_alarm():
    """An uncertain input is not good: it neither raises nor clears."""
    r = Run(alarm())
    assert r.at(0, Reading(101.0, uncertain("out_of_range"))) == []
    r.at(1, 101)
    assert r.at(2, Reading(50.0, uncertain("out_of_range"))) == []
    assert r.s.active


def test_missing_signal_holds_the_alarm():
    """A signal absent from the readings holds the alarm with quality bad(no_data)."""
    r = Run(alarm())
    r.at(0, 101)
    assert r.at(1) == []
    assert r.s.active and r.s.quality == "bad(no_data)"


def test_bad_input_restarts_a_running_on_delay():
    """The on-delay needs continuous good data: a bad spell restarts it."""
    r = Run(alarm(on_delay=10.0))
    r.at(0, 101)
    r.at(5, Reading(None, bad("comm_loss")))
    assert r.at(11, 101) == []
    assert r.at(21, 101) == ["raised"]


def test_bad_input_restarts_a_running_off_delay():
    """The off-delay needs continuous good data too: a bad spell restarts it."""
    r = Run(alarm(off_delay=5.0))
    r.at(0, 101)
    r.at(1, 99)
    r.at(3, Reading(None, bad("comm_loss")))
    assert r.at(4, 99) == []  # the delay starts again at 4 s
    assert r.at(8.9, 99) == [] and r.s.active
    assert r.at(9.0, 99) == ["cleared"]


def test_quality_alarm_raises_after_its_delay_of_bad_data():
    """A quality alarm raises once its signal has been not good for its delay."""
    d = alarm("quality", None, signal="drum.quality", on_delay=10.0, message="q {quality}")
    r = Run(d)
    bad_q = Reading(0.0, bad("comm_loss"))
    assert r.states == {} and r.at(0, **{"drum.quality": bad_q}) == []
    assert r.at(10, **{"drum.quality": bad_q}) == ["raised"]
    assert r.events[0].message == "q bad(comm_loss)"


def test_quality_alarm_clears_when_data_is_good_again():
    """A quality alarm clears when its signal is good again."""
    d = alarm("quality", None, signal="drum.quality")
    r = Run(d)
    r.at(0, **{"drum.quality": Reading(0.0, bad("comm_loss"))})
    assert r.at(1, **{"drum.quality": Reading(2.0, GOOD)}) == ["cleared"]


def test_realarm_announces_again_while_unacknowledged():
    """With realarm 60 s an unacknowledged active alarm is announced again every 60 s."""
    r = Run(alarm(realarm=60.0))
    r.at(0, 101)
    assert r.at(59, 101) == []
    assert r.at(60, 101) == ["realarm"]
    assert r.at(119, 101) == []
    assert r.at(120, 101) == ["realarm"]


def test_no_realarm_once_acknowledged():
    """An acknowledged alarm is not announced again."""
    r = Run(alarm(realarm=60.0))
    r.at(0, 101)
    r.states = {"a": replace(r.s, unacknowledged=False)}
    assert r.at(120, 101) == []


def rate(direction: str, limit: float = 2.0) -> AlarmDef:
    return alarm("rate", limit, direction=direction, unit_label="K/min")


def test_rate_rising_raises_when_faster_than_limit_per_minute():
    """A rise of 3 K over 60 s (3 K/min) raises a 2 K/min rising-rate alarm."""
    r = Run(rate("rising"))
    r.at(0, 100.0)
    assert r.at(30, 101.5) == ["raised"]
    assert r.events[0].value == 3.0


def test_rate_needs_ten_seconds_of_history():
    """A rate is not known before 10 s of good history: nothing raises on a jump at 5 s."""
    r = Run(rate("rising"))
    r.at(0, 100.0)
    assert r.at(5, 110.0) == []


def test_rate_rising_ignores_a_fall():
    """A rising-rate alarm does not raise on a fast fall."""
    r = Run(rate("rising"))
    r.at(0, 100.0)
    assert r.at(30, 90.0) == []


def test_rate_falling_raises_on_a_fast_fall():
    """A fall of 4 K/min raises a 2 K/min falling-rate alarm."""
    r = Run(rate("falling"))
    r.at(0, 100.0)
    assert r.at(30, 98.0) == ["raised"]
    assert r.events[0].value == -4.0


def test_rate_either_raises_both_ways():
    """An either-direction rate alarm raises on a fast fall too."""
    r = Run(rate("either"))
    r.at(0, 100.0)
    assert r.at(30, 98.0) == ["raised"]


def test_rate_is_taken_over_the_last_minute():
    """Samples older than 60 s are forgotten: a slow climb after a jump is not fast."""
    r = Run(rate("rising"))
    r.at(0, 100.0)
    r.at(1, 100.0)
    for t in range(70, 131, 10):
        kinds = r.at(t, 200.0 + (t - 70) * 0.01)
    assert kinds == [] and abs(r.s.value - 0.6) < 1e-9  # 0.6 K/min over the last 60 s


def test_deviation_raises_when_signals_differ_by_more_than_limit():
    """A deviation alarm compares |x - y| with its limit."""
    d = alarm("deviation", 3.0, other="y")
    r = Run(d)
    assert r.at(0, 100.0, y=good(96.5)) == ["raised"]
    assert r.events[0].value == 3.5


def test_deviation_holds_when_the_other_signal_is_bad():
    """A deviation alarm holds when its second signal is not good."""
    d = alarm("deviation", 3.0, other="y")
    r = Run(d)
    r.at(0, 100.0, y=good(90.0))
    assert r.at(1, 100.0, y=Reading(None, bad("comm_loss"))) == []
    assert r.s.active


def test_deviation_of_two_gauge_pressures_needs_no_barometer():
    """Two gauge pressures are compared directly, without a barometer."""
    d = alarm("deviation", 0.3e5, other="y", signal_reference="gauge", other_reference="gauge")
    assert Run(d).at(0, 10.0e5, y=good(9.5e5)) == ["raised"]


def test_deviation_of_gauge_and_absolute_pressures_uses_the_barometer():
    """A gauge and an absolute pressure are compared as absolute pressures."""
    d = alarm("deviation", 0.3e5, other="y", signal_reference="gauge", other_reference="absolute")
    r = Run(d)
    assert r.at(0, 10.0e5, y=good(11.0e5), barometer=good(1.0e5)) == []
    assert r.at(1, 10.0e5, y=good(11.0e5)) == [] and r.s.quality == "bad(no_data)"


def pressure_high(limit_ref: str, signal_ref: str) -> AlarmDef:
    return alarm(
        "high",
        10e5,  # 10 bar in the limit's reference
        quantity="pressure",
        reference=limit_ref,
        signal_reference=signal_ref,
        unit="bar",
        unit_kind="pressure",
        unit_label="barg",
    )


def test_gauge_limit_on_absolute_signal_uses_the_barometer():
    """A 10 barg limit on an absolute signal compares with absolute - barometer."""
    r = Run(pressure_high("gauge", "absolute"))
    baro = good(95_000.0)
    assert r.at(0, 10.9e5, barometer=baro) == []  # 9.95 barg
    assert r.at(1, 11.0e5 + 1.0, barometer=baro) == ["raised"]
    assert abs(r.events[0].value - (11.0e5 + 1.0 - 95_000.0)) < 1e-6
    assert r.events[0].message == "x high: 10.05 barg (limit 10 barg)"


def test_reference_change_without_a_good_barometer_holds():
    """A gauge limit on an absolute signal holds when the barometer is not good."""
    r = Run(pressure_high("gauge", "absolute"))
    assert r.at(0, 20e5, barometer=Reading(None, bad("stale"))) == []
    assert r.s.quality == "bad(stale)"


def test_same_reference_needs_no_barometer():
    """A gauge limit on a gauge tag compares directly, without a barometer."""
    r = Run(pressure_high("gauge", "gauge"))
    assert r.at(0, 10.5e5) == ["raised"]


def test_vacuum_signal_against_absolute_limit():
    """A vacuum reading of 80 kPa at 100 kPa barometer is 20 kPa absolute (high at 15)."""
    d = replace(pressure_high("absolute", "vacuum"), limit=15_000.0)
    r = Run(d)
    assert r.at(0, 80_000.0, barometer=good(100_000.0)) == ["raised"]
    assert abs(r.events[0].value - 20_000.0) < 1e-9


def suppressed_alarm() -> AlarmDef:
    return alarm(suppress=Suppress("load", "<", 10.0, "tdiff"))


def test_suppression_by_design_hides_the_alarm():
    """While its suppress_when condition holds, the alarm does not announce."""
    r = Run(suppressed_alarm())
    assert r.at(0, 101, load=good(5.0)) == ["suppressed"]
    assert r.s.state == "suppressed" and not r.s.unacknowledged


def test_suppression_lifting_announces_a_standing_alarm():
    """When suppression ends with the condition standing, the alarm is raised."""
    r = Run(suppressed_alarm())
    r.at(0, 101, load=good(5.0))
    assert r.at(1, 101, load=good(20.0)) == ["unsuppressed"]  # the lift announces it


def test_suppression_of_an_active_alarm_clears_its_acknowledgement_wait():
    """Suppression of an active unacknowledged alarm leaves nothing to acknowledge."""
    r = Run(suppressed_alarm())
    r.at(0, 101, load=good(20.0))
    assert r.at(1, 101, load=good(5.0)) == ["suppressed"]
    assert (r.s.active, r.s.unacknowledged) == (True, False)


def test_suppression_lifting_with_the_condition_gone_is_normal():
    """ISA-18.2: suppressed -> normal when suppression ends and the condition is gone."""
    r = Run(suppressed_alarm())
    r.at(0, 101, load=good(20.0))
    r.at(1, 101, load=good(5.0))
    r.at(2, 50, load=good(5.0))  # clears silently while suppressed
    assert r.at(3, 50, load=good(20.0)) == ["unsuppressed"]
    assert (r.s.state, r.s.active, r.s.unacknowledged) == ("normal", False, False)


def test_bad_suppress_signal_holds_the_suppression():
    """A not-good suppress signal leaves the suppression as it was."""
    r = Run(suppressed_alarm())
    r.at(0, 101, load=good(5.0))
    assert r.at(1, 101, load=Reading(None, bad("comm_loss"))) == []
    assert r.s.suppressed


def test_saturation_alarm_message_carries_the_hint():
    """The built-in saturation alarm adds derive's commissioning hint to its message."""
    d = alarm(
        limit=2.0,
        name="drum-saturation",
        signal="drum.deviation",
        builtin="saturation",
        subject="drum",
        message="Point drum is {value} {unit} off",
    )
    sig = Signals({"drum.deviation": good(5.0)}, {"drum": "check the pressure reference"})
    _, events = step({d.name: d}, {}, sig, 0.0)
    assert events[0].message == "Point drum is 5 K off. check the pressure reference"


def test_step_starts_missing_states_and_drops_unknown_ones():
    """step gives every defined alarm a state and forgets states of undefined alarms."""
    d = alarm()
    states, _ = step({"a": d}, {"gone": AlarmState("gone", "low")}, {"x": good(1.0)}, 0.0)
    assert list(states) == ["a"] and states["a"].state == "normal"


def test_carry_over_keeps_state_and_takes_new_priority():
    """On reload an alarm with the same name keeps its state with the new priority."""
    old = {
        "a": AlarmState("a", "high", active=True, unacknowledged=True),
        "b": AlarmState("b", "low"),
    }
    new = carry_over(old, {"a": alarm(priority="critical"), "c": alarm(name="c")})
    assert set(new) == {"a", "c"}
    assert new["a"].state == "unacknowledged" and new["a"].priority == "critical"
    assert new["c"].state == "normal"


def test_restored_active_alarm_is_not_announced_again():
    """An alarm restored active and unacknowledged (after a restart) is not raised again."""
    r = Run(alarm())
    r.at(0, 101)
    restored = AlarmState.from_dict(r.s.to_dict())
    r2 = Run(alarm(), restored)
    assert r2.at(100, 101) == []
    assert r2.s.state == "unacknowledged"


def test_engine_imports_no_io_library():
    """The engine is pure: importing it loads no sqlite3, asyncio or protocol library."""
    code = (
        "import sys, edge.alarms.engine; "
        "print(','.join(m for m in ('sqlite3', 'asyncio', 'aiohttp', 'pymodbus', 'asyncua') "
        "if m in sys.modules))"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == ""


def test_retire_clears_only_standing_alarms_that_a_reload_removes():
    """retire() ends removed alarms that are active or unacknowledged, and nothing else."""
    from dataclasses import replace as _replace

    from edge.alarms.engine import AlarmState, retire

    def state(name: str, **kw) -> AlarmState:
        return _replace(AlarmState(name=name, priority="high"), **kw)

    old = {
        "kept": state("kept", active=True, unacknowledged=True),
        "gone-active": state("gone-active", active=True, unacknowledged=False),
        "gone-unacked": state("gone-unacked", active=False, unacknowledged=True),
        "gone-quiet": state("gone-quiet"),
    }
    events = retire(old, {"kept": object()}, 500.0)  # type: ignore[dict-item]
    assert [(e.alarm, e.kind, e.time) for e in events] == [
        ("gone-active", "cleared", 500.0),
        ("gone-unacked", "cleared", 500.0),
    ]
    assert all(e.comment == "removed from the configuration" for e in events)


def test_quality_alarm_short_cut_gives_what_the_full_step_gives():
    """A quality alarm at rest with good input skips the full step: same state, no event."""
    from edge.alarms.engine import _causes_quiet, _resting, _step_one

    def _quiet(d, s, signals, causes):  # step's shortcut as one test: rest, causes, input
        if not _resting(d, s) or not _causes_quiet(d.causes, causes):
            return False
        r = signals.get(d.signal)
        return r is not None and r.quality is GOOD

    d = alarm("quality", None, signal="q", on_delay=5.0)
    base = AlarmState(name="a", priority="high")
    states = [
        base,
        replace(base, active=True, unacknowledged=True),
        replace(base, unacknowledged=True),
        replace(base, pending_since=1.0, condition=True),
        replace(base, shelved_until=50.0),
        replace(base, shelved_until=5.0),
        replace(base, out_of_service=True),
        replace(base, quality="bad(comm_loss)"),
    ]
    inputs = [Reading(2.0, GOOD), Reading(0.0, bad("comm_loss")), Reading(1.0, uncertain("x"))]
    quiet_seen = 0
    for s in states:
        for r in inputs:
            sig = {"q": r}
            full = _step_one(d, s, sig, {}, 10.0, {})
            got, events = step({"a": d}, {"a": s}, sig, 10.0)
            assert (got["a"], [e.kind for e in events]) == (full[0], [e.kind for e in full[1]])
            quiet_seen += _quiet(d, s, sig, {})
    assert quiet_seen == 3  # normal, returned unacknowledged, out of service: good input
