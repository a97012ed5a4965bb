"""Operator actions on alarms: acknowledge (one, or all of a priority), shelve (timed or
one-shot) and unshelve, out of service and back in service. Each records who and why.
Pure: ``act(defs, states, action, now) -> (states, events)``."""

from __future__ import annotations

import math
from collections.abc import Mapping

from edge.alarms.definitions import AlarmDef
from edge.alarms.events import enter_mask, initial_state, make_event
from edge.alarms.messages import duration_text
from edge.alarms.state import ACTIONS, Action, AlarmState, replace_state
from edge.config import PRIORITIES
from edge.errors import OperatorError, UnknownAlarm
from edge.model import AlarmEvent

__all__ = ["act"]


def act(
    defs: Mapping[str, AlarmDef],
    states: Mapping[str, AlarmState],
    action: Action,
    now: float,
) -> tuple[dict[str, AlarmState], list[AlarmEvent]]:
    """Apply an operator action. Raises UnknownAlarm for an alarm not in ``defs`` and
    OperatorError for an action not allowed in the alarm's present state."""
    if action.kind not in ACTIONS:
        raise OperatorError(f"unknown action {action.kind!r}; one of {', '.join(ACTIONS)}")
    if not action.user or not action.user.strip():
        raise OperatorError("say who is acting: the user is required")
    out = dict(states)
    events: list[AlarmEvent] = []
    if action.kind == "ack_priority":
        if action.alarm not in PRIORITIES:
            raise OperatorError(
                f"unknown priority {action.alarm!r}; one of {', '.join(PRIORITIES)}"
            )
        for name in sorted(defs):
            s = out.get(name) or initial_state(defs[name])
            if s.priority == action.alarm and not s.masked and (s.unacknowledged or s.latched):
                out[name], more = _apply(defs[name], s, action, now)
                events.extend(more)
        return out, events
    if action.alarm not in defs:
        raise UnknownAlarm(action.alarm)
    d = defs[action.alarm]
    out[d.name], events = _apply(d, out.get(d.name) or initial_state(d), action, now)
    return out, events


def _apply(
    d: AlarmDef, s: AlarmState, a: Action, now: float
) -> tuple[AlarmState, list[AlarmEvent]]:
    before = s.state
    handler = {
        "ack": _ack,
        "ack_priority": _ack,
        "shelve": _shelve,
        "unshelve": _unshelve,
        "out_of_service": _out_of_service,
        "in_service": _in_service,
    }[a.kind]
    s, events = handler(d, replace_state(s, user=a.user), a, now)
    if s.state != before:
        s = replace_state(s, since=now)
    return s, events


def _ack(d: AlarmDef, s: AlarmState, a: Action, now: float) -> tuple[AlarmState, list]:
    if s.masked:
        raise OperatorError(f"{d.name} is {s.state.replace('_', ' ')}: nothing to acknowledge")
    if not s.unacknowledged and not s.latched:
        word = "already acknowledged" if s.active else "not in alarm"
        raise OperatorError(f"{d.name} is {word}: nothing to acknowledge")
    events = []
    comment = a.comment or None
    if s.unacknowledged:
        s = replace_state(s, unacknowledged=False, ack_time=now, ack_user=a.user)
        events.append(make_event(d, s, "acknowledged", now, {}, user=a.user, comment=comment))
    if s.latched:
        s = replace_state(s, active=False, latched=False, active_since=None)
        events.append(make_event(d, s, "cleared", now, {}, user=a.user, comment="latch reset"))
    return s, events


def _shelve(d: AlarmDef, s: AlarmState, a: Action, now: float) -> tuple[AlarmState, list]:
    if s.out_of_service:
        raise OperatorError(f"{d.name} is out of service: return it to service first")
    if not d.shelvable:
        raise OperatorError(f"{d.name} may not be shelved: {d.not_shelvable_why}")
    if not a.comment or not a.comment.strip():
        raise OperatorError("give a reason for shelving")
    longest = d.max_shelve
    if a.duration is None:
        if not s.active:
            raise OperatorError(f"{d.name} is not active: one-shot shelving needs an active alarm")
        # a one-shot shelve ends when the alarm returns to normal, at the latest after the
        # longest shelve the philosophy allows
        until = now + longest if longest is not None else None
        text = "until it returns to normal"
        oneshot = True
    elif not math.isfinite(a.duration) or a.duration <= 0:
        raise OperatorError(f"a shelve duration must be positive, got {a.duration!r}")
    elif longest is not None and a.duration > longest:
        raise OperatorError(
            f"{d.name} may be shelved for at most {duration_text(longest)} "
            f"(alarm_philosophy.max_shelve), not {duration_text(a.duration)}"
        )
    else:
        until, text, oneshot = now + a.duration, f"for {duration_text(a.duration)}", False
    s = enter_mask(s)
    s = replace_state(s, shelved_until=until, shelved_oneshot=oneshot, reason=a.comment)
    message = f"{d.name} shelved {text} by {a.user}: {a.comment}"
    return s, [
        make_event(d, s, "shelved", now, {}, user=a.user, comment=a.comment, message=message)
    ]


def _unmasked(d: AlarmDef, s: AlarmState, now: float) -> AlarmState:
    """The mask is lifted: an alarm still active is announced again, by the lifting event
    itself (no separate ``raised``, no acknowledgement nobody made)."""
    if not s.masked and s.active and not s.unacknowledged:
        s = replace_state(s, unacknowledged=True, announced=now)
    return s


def _unshelve(d: AlarmDef, s: AlarmState, a: Action, now: float) -> tuple[AlarmState, list]:
    if not s.shelved:
        raise OperatorError(f"{d.name} is not shelved")
    s = _unmasked(d, replace_state(s, shelved_until=None, shelved_oneshot=False, reason=None), now)
    return s, [make_event(d, s, "unshelved", now, {}, user=a.user, comment=a.comment or None)]


def _out_of_service(d: AlarmDef, s: AlarmState, a: Action, now: float) -> tuple[AlarmState, list]:
    if s.out_of_service:
        raise OperatorError(f"{d.name} is already out of service")
    if not a.comment or not a.comment.strip():
        raise OperatorError("give a reason for taking an alarm out of service")
    s = replace_state(enter_mask(s), out_of_service=True, shelved_until=None, shelved_oneshot=False)
    s = replace_state(s, reason=a.comment)
    message = f"{d.name} taken out of service by {a.user}: {a.comment}"
    return s, [
        make_event(d, s, "out_of_service", now, {}, user=a.user, comment=a.comment, message=message)
    ]


def _in_service(d: AlarmDef, s: AlarmState, a: Action, now: float) -> tuple[AlarmState, list]:
    if not s.out_of_service:
        raise OperatorError(f"{d.name} is not out of service")
    s = _unmasked(d, replace_state(s, out_of_service=False, reason=None), now)
    message = f"{d.name} returned to service by {a.user}"
    return s, [
        make_event(
            d, s, "in_service", now, {}, user=a.user, comment=a.comment or None, message=message
        )
    ]
