"""The alarm engine: a pure ISA-18.2 state machine.

``step(defs, states, signals, now) -> (states, events)`` evaluates every alarm once;
``act(defs, states, action, now) -> (states, events)`` applies an operator action. Timers
(on-delay, off-delay, shelve expiry, re-alarm) run on ``now`` alone, so tests never sleep.

Rules, in the order they apply each step:

1. A timed shelve whose expiry has come ends (``shelve_expired``).
2. Suppression by design follows its ``suppress_when`` signal; a not-good suppress signal
   holds the suppression where it is.
3. An input that is not good (uncertain, bad, missing, or a barometer needed for a
   reference change that is not good) HOLDS the alarm: it neither raises nor clears, and
   running on/off delays restart once data is good again (a delay needs continuous good
   data). The quality alarm speaks instead.
4. With good input the condition is evaluated with its deadband (hysteresis); the
   condition must stand ``on_delay`` to raise and be gone ``off_delay`` to clear. A latched
   alarm stays active after its condition clears until an operator acknowledges (resets) it.
5. While masked (shelved, suppressed, out of service) ``active`` follows the process
   silently; when the mask lifts with the alarm active, it is announced again (``raised``).
   A one-shot shelve ends when the alarm clears.
6. Re-alarm: an alarm active and unacknowledged for ``realarm`` seconds since its last
   announcement is announced again (``realarm``).

Values: a pressure alarm compares in the reference its limit was written in; events carry
value and limit in SI in that reference (rate alarms: per minute; deviation: the
difference signal - other).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import replace

from edge.alarms.actions import act
from edge.alarms.definitions import AlarmDef, compile_alarms
from edge.alarms.events import announce, enter_mask, initial_state, make_event
from edge.alarms.signals import Signals, signals_from, source_tags
from edge.alarms.state import ACTIONS, STATES, Action, AlarmState
from edge.model import GOOD, NO_DATA, AlarmEvent, Level, Quality, Reading, bad, worst

__all__ = [
    "ACTIONS",
    "RATE_MIN_SPAN",
    "RATE_WINDOW",
    "STATES",
    "Action",
    "AlarmDef",
    "AlarmState",
    "Signals",
    "act",
    "carry_over",
    "compile_alarms",
    "initial_state",
    "retire",
    "signals_from",
    "source_tags",
    "step",
]

RATE_WINDOW = 60.0  # s: a rate is the change over the last minute ...
RATE_MIN_SPAN = 10.0  # s: ... once at least this much good history is there


def carry_over(
    old_states: Mapping[str, AlarmState], new_defs: Mapping[str, AlarmDef]
) -> dict[str, AlarmState]:
    """States for a new set of definitions (config reload, restart): an alarm with the same
    name keeps its state (with the new priority); new alarms start normal; removed ones go."""
    out: dict[str, AlarmState] = {}
    for name, d in new_defs.items():
        s = old_states.get(name)
        out[name] = initial_state(d) if s is None else replace(s, priority=d.priority)
    return out


def retire(
    old_states: Mapping[str, AlarmState], new_defs: Mapping[str, AlarmDef], now: float
) -> list[AlarmEvent]:
    """``cleared`` events for alarms a reload removes while they stand (active or waiting
    for acknowledgement), so that no receiver keeps an alert open that nothing will end."""
    events = []
    for name, s in sorted(old_states.items()):
        if name in new_defs or not (s.active or s.unacknowledged):
            continue
        events.append(
            AlarmEvent(
                alarm=name,
                kind="cleared",
                time=now,
                priority=s.priority,
                value=s.value,
                quality=s.quality,
                comment="removed from the configuration",
                message=f"{name}: removed from the configuration; no longer watched",
                state="normal",
            )
        )
    return events


# --- measuring -------------------------------------------------------------------------


def _good(r: Reading | None) -> bool:
    return r is not None and r.quality.good and r.usable


def _reading(signals: Mapping[str, Reading], name: str) -> Reading:
    r = signals.get(name)
    return r if r is not None else Reading(None, bad(NO_DATA))


def _to_reference(
    v: float, src: str | None, dst: str | None, signals: Mapping[str, Reading]
) -> float | Quality:
    """A pressure from reference ``src`` into ``dst``, with the barometer if they differ.
    Returns the barometer's quality when it is needed and not good."""
    if src is None or dst is None or src == dst:
        return v
    baro = _reading(signals, "barometer")
    if not _good(baro):
        return baro.quality if not baro.quality.good else bad(NO_DATA)
    b = float(baro.value)  # type: ignore[arg-type]
    absolute = v if src == "absolute" else v + b if src == "gauge" else b - v
    return absolute if dst == "absolute" else absolute - b if dst == "gauge" else b - absolute


def _measure(
    d: AlarmDef, s: AlarmState, signals: Mapping[str, Reading], now: float
) -> tuple[float | None, Quality, bool, tuple[tuple[float, float], ...]]:
    """(value in the alarm's frame, input quality, good?, rate history)."""
    r = _reading(signals, d.signal)
    if d.kind == "quality":
        return None, r.quality, True, ()
    if not _good(r):
        return None, r.quality, False, ()
    v = float(r.value)  # type: ignore[arg-type]
    if d.kind == "deviation":
        o = _reading(signals, d.other or "")
        if not _good(o):
            return None, o.quality, False, ()
        # compare pressures in a common reference: their own if they share one
        common = d.signal_reference if d.signal_reference == d.other_reference else "absolute"
        a = _to_reference(v, d.signal_reference, common, signals)
        b = _to_reference(float(o.value), d.other_reference, common, signals)  # type: ignore[arg-type]
        if isinstance(a, Quality) or isinstance(b, Quality):
            q = a if isinstance(a, Quality) else b
            return None, q, False, ()  # type: ignore[return-value]
        return a - b, worst(r.quality, o.quality), True, ()
    if d.kind == "rate":
        history = (*((t, x) for t, x in s.history if now - t <= RATE_WINDOW and t < now), (now, v))
        t0, x0 = history[0]
        rate = (v - x0) / (now - t0) * 60.0 if now - t0 >= RATE_MIN_SPAN else None
        return rate, r.quality, rate is not None, history
    converted = _to_reference(v, d.signal_reference, d.reference, signals)
    if isinstance(converted, Quality):
        return None, converted, False, ()
    return converted, r.quality, True, ()


def _beyond(d: AlarmDef, x: float, prev: bool) -> bool:
    """The condition with hysteresis: once true it holds until the value is back past the
    limit by the deadband."""
    limit, db = float(d.limit or 0.0), d.deadband
    if d.kind in ("low", "low_low"):
        return x <= limit + db if prev else x < limit
    if d.kind == "deviation":
        x = abs(x)
    elif d.kind == "rate":
        x = x if d.direction == "rising" else -x if d.direction == "falling" else abs(x)
    return x >= limit - db if prev else x > limit


def _suppression(d: AlarmDef, s: AlarmState, signals: Mapping[str, Reading]) -> bool:
    sup = d.suppress
    if sup is None:
        return False
    r = _reading(signals, sup.signal)
    if not _good(r):
        return s.suppressed
    v = _to_reference(float(r.value), sup.signal_reference, sup.reference, signals)  # type: ignore[arg-type]
    if isinstance(v, Quality):
        return s.suppressed
    return v < sup.limit if sup.op == "<" else v > sup.limit


# --- step ------------------------------------------------------------------------------


def _step_one(
    d: AlarmDef,
    s: AlarmState,
    signals: Mapping[str, Reading],
    hints: Mapping[str, str],
    now: float,
) -> tuple[AlarmState, list[AlarmEvent]]:
    events: list[AlarmEvent] = []
    before = s.state
    was_masked = s.masked
    value, quality, good, history = _measure(d, s, signals, now)
    quality_text = str(quality)
    # replace() only what changed: this runs for every alarm on every pass
    if value != s.value or quality_text != s.quality or history != s.history:
        s = replace(s, value=value, quality=quality_text, history=history)

    if s.shelved_until is not None and now >= s.shelved_until:
        s = replace(s, shelved_until=None, reason=None)
        events.append(make_event(d, s, "shelve_expired", now, hints))

    suppressed = _suppression(d, s, signals)
    if suppressed != s.suppressed:
        s = replace(s, suppressed=suppressed)
        if suppressed:
            s = enter_mask(s)
        events.append(make_event(d, s, "suppressed" if suppressed else "unsuppressed", now, hints))

    if good:
        raw = quality.level < Level.GOOD if d.kind == "quality" else _beyond(d, value, s.condition)  # type: ignore[arg-type]
        if raw:
            if raw != s.condition or s.clearing_since is not None or s.latched:
                s = replace(s, condition=raw, clearing_since=None, latched=False)
            if not s.active:
                pending = now if s.pending_since is None else s.pending_since
                if now - pending >= d.on_delay:
                    s = replace(s, active=True, pending_since=None, active_since=now)
                    if not s.masked:
                        s, ev = announce(d, s, now, hints)
                        events.append(ev)
                else:
                    s = replace(s, pending_since=pending)
        else:
            if raw != s.condition or s.pending_since is not None:
                s = replace(s, condition=raw, pending_since=None)
            if s.active and not (s.latched and d.latch):
                clearing = now if s.clearing_since is None else s.clearing_since
                if s.latched or now - clearing >= d.off_delay:
                    s, more = _clear(d, s, now, hints)
                    events.extend(more)
                else:
                    s = replace(s, clearing_since=clearing)
    elif s.pending_since is not None or s.clearing_since is not None:
        s = replace(s, pending_since=None, clearing_since=None)

    if was_masked and not s.masked and s.active and not s.unacknowledged:
        s, ev = announce(d, s, now, hints)
        events.append(ev)

    if (
        d.realarm
        and not s.masked
        and s.active
        and s.unacknowledged
        and s.announced is not None
        and now - s.announced >= d.realarm
    ):
        s = replace(s, announced=now)
        events.append(make_event(d, s, "realarm", now, hints))

    if s.state != before:
        s = replace(s, since=now)
    return s, events


def _clear(
    d: AlarmDef, s: AlarmState, now: float, hints: Mapping[str, str]
) -> tuple[AlarmState, list[AlarmEvent]]:
    """The condition has been gone for the off-delay."""
    s = replace(s, clearing_since=None)
    if d.latch and not s.masked:
        return replace(s, latched=True), []  # held until an operator resets it
    s = replace(s, active=False, active_since=None, latched=False)
    if not s.masked:
        return s, [make_event(d, s, "cleared", now, hints)]
    if s.shelved_oneshot:
        s = replace(s, shelved_oneshot=False, reason=None)
        return s, [make_event(d, s, "unshelved", now, hints, comment="returned to normal")]
    return s, []


def step(
    defs: Mapping[str, AlarmDef],
    states: Mapping[str, AlarmState],
    signals: Mapping[str, Reading],
    now: float,
) -> tuple[dict[str, AlarmState], list[AlarmEvent]]:
    """Evaluate every alarm once at time ``now``. Alarms without a state start normal;
    states of alarms not in ``defs`` are dropped."""
    hints = signals.hints if isinstance(signals, Signals) else {}
    out: dict[str, AlarmState] = {}
    events: list[AlarmEvent] = []
    for name, d in defs.items():
        s = states.get(name) or initial_state(d)
        if d.kind == "quality" and _quiet(d, s, signals):
            out[name] = s
            continue
        out[name], more = _step_one(d, s, signals, hints, now)
        events.extend(more)
    return out, events


def _quiet(d: AlarmDef, s: AlarmState, signals: Mapping[str, Reading]) -> bool:
    """A quality alarm at rest whose input is good: ``_step_one`` would hand back the
    same state and no event. That is every point's built-in quality alarm on a normal
    pass (5,000 of them at 10,000 tags), so they skip the full step."""
    if (
        s.active
        or s.condition
        or s.pending_since is not None
        or s.shelved_until is not None
        or s.suppressed
        or d.suppress is not None
        or s.value is not None
        or s.history
        or s.quality != "good"
    ):
        return False
    r = signals.get(d.signal)
    return r is not None and r.quality is GOOD
