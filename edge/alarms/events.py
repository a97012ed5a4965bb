"""Building alarm events and the life-cycle moves shared by the engine and the operator
actions. Pure."""

from __future__ import annotations

from collections.abc import Mapping

from edge.alarms.definitions import AlarmDef
from edge.alarms.messages import render
from edge.alarms.state import AlarmState, replace_state
from edge.model import AlarmEvent

__all__ = ["LIFT_KINDS", "activate", "announce", "enter_mask", "initial_state", "make_event"]

# Events that lift a mask. When the alarm is active at that moment it is announced again by
# that one event (its state says ``unacknowledged``); there is no separate ``raised``.
LIFT_KINDS = frozenset({"unshelved", "shelve_expired", "unsuppressed", "in_service"})
# Events whose message is the one rendered when the alarm came in.
_ACTIVATION_MESSAGE = frozenset({"raised", "realarm", "acknowledged"})


def initial_state(d: AlarmDef) -> AlarmState:
    return AlarmState(name=d.name, priority=d.priority)


def make_event(
    d: AlarmDef,
    s: AlarmState,
    kind: str,
    now: float,
    hints: Mapping[str, str],
    *,
    user: str | None = None,
    comment: str | None = None,
    message: str | None = None,
) -> AlarmEvent:
    if message is None and kind in _ACTIVATION_MESSAGE and s.in_message is not None:
        message = s.in_message
    if message is None:
        message = render(d, s.value, s.quality, hints.get(d.subject) if d.subject else None)
    return AlarmEvent(
        alarm=d.name,
        kind=kind,
        time=now,
        priority=d.priority,
        value=s.value,
        limit=d.limit,
        quality=s.quality,
        user=user,
        comment=comment,
        message=message,
        state=s.state,
    )


def activate(d: AlarmDef, s: AlarmState, now: float, hints: Mapping[str, str]) -> AlarmState:
    """The alarm comes in: keep what happened (time in, value and limit, input quality,
    message rendered now) apart from the live value; a new activation needs a new ack."""
    hint = hints.get(d.subject) if d.subject else None
    return replace_state(
        s,
        active=True,
        latched=False,
        pending_since=None,
        clearing_since=None,
        active_since=now,
        in_time=now,
        in_value=s.value,
        in_limit=d.limit,
        in_quality=s.quality,
        in_message=render(d, s.value, s.quality, hint),
        ack_time=None,
        ack_user=None,
    )


def announce(
    d: AlarmDef, s: AlarmState, now: float, hints: Mapping[str, str]
) -> tuple[AlarmState, AlarmEvent]:
    """The alarm is announced: it waits for acknowledgement."""
    s = replace_state(s, unacknowledged=True, announced=now)
    return s, make_event(d, s, "raised", now, hints)


def enter_mask(s: AlarmState) -> AlarmState:
    """Entering a mask: nothing waits for acknowledgement, a latch is let go (a latched
    alarm's condition has already returned to normal)."""
    active = s.active and not s.latched
    return replace_state(
        s,
        unacknowledged=False,
        latched=False,
        active=active,
        active_since=s.active_since if active else None,
    )
