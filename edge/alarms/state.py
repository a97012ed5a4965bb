"""The state of one alarm (ISA-18.2 life cycle) and the operator actions on it. Pure.

Two facts make the life cycle: ``active`` (the alarm condition stands, after delays and
latch) and ``unacknowledged`` (it waits for an operator), plus ``latched`` (the condition
has returned to normal but a latching alarm holds until an operator resets it). The state
is derived (ANSI/ISA-18.2-2016 / IEC 62682 alarm states, from memory):

==========  ================  =======  ===========================
active      unacknowledged    latched  state
==========  ================  =======  ===========================
no          no                -        normal
yes         yes               no       unacknowledged
yes         no                no       acknowledged
no          yes               -        returned_unacknowledged
yes         either            yes      latched
==========  ================  =======  ===========================

Shelved, suppressed (by design) and out of service mask the life cycle and take
precedence, in the order out_of_service > shelved > suppressed. While masked by a shelve,
out of service or a configured ``suppress_when``, ``active`` keeps following the process
silently; nothing is announced. Suppressed because a cause alarm explains it
(``suppressed_by``), the alarm is held normal: it has to qualify afresh once the cause
clears.

What happened is kept per activation: ``in_time`` (time in; ``active_since`` is the same
while active), ``in_value`` and
``in_limit`` (SI, in the alarm's frame), ``in_quality`` (the input quality then, the reason
a quality alarm came in) and ``in_message`` (the message rendered then). The live value is
``value``; ``ack_time``/``ack_user`` say who acknowledged it and when.
"""

from __future__ import annotations

from dataclasses import dataclass, fields
from operator import attrgetter
from typing import Any

from edge.records import replacer

__all__ = ["ACTIONS", "STATES", "Action", "AlarmState", "replace_state", "stable_key"]

STATES = (
    "normal",
    "unacknowledged",
    "acknowledged",
    "returned_unacknowledged",
    "latched",
    "shelved",
    "suppressed",
    "out_of_service",
)
ACTIONS = ("ack", "ack_priority", "shelve", "unshelve", "out_of_service", "in_service")

# Fields that change with every reading; the journal does not rewrite a state for them.
VOLATILE = frozenset({"value", "quality", "history"})


@dataclass(frozen=True, slots=True)
class AlarmState:
    """Where one alarm stands. Times are seconds since the epoch."""

    name: str
    priority: str
    active: bool = False
    unacknowledged: bool = False
    shelved_until: float | None = None  # timed shelve: expiry
    shelved_oneshot: bool = False  # one-shot shelve: ends when the alarm clears
    suppressed: bool = False  # by design (suppress_when, or a cause alarm)
    suppressed_by: str | None = None  # the cause alarm that explains this one
    out_of_service: bool = False
    since: float | None = None  # last change of ``state``
    value: float | None = None  # last evaluated value (SI, in the alarm's frame)
    quality: str = "good"  # quality of the last input
    condition: bool = False  # the limit is crossed (with deadband), before delays
    pending_since: float | None = None  # condition true, on-delay running
    clearing_since: float | None = None  # condition false, off-delay running
    latched: bool = False  # condition cleared, held active until reset (acknowledge)
    active_since: float | None = None
    announced: float | None = None  # last raised/realarm announcement (for realarm)
    reason: str | None = None  # shelve / out-of-service reason
    user: str | None = None  # who did the last operator action
    in_time: float | None = None  # time in of the last activation (kept after it returns)
    in_value: float | None = None  # value at activation (SI, in the alarm's frame)
    in_limit: float | None = None  # limit at activation (SI)
    in_quality: str | None = None  # input quality at activation
    in_message: str | None = None  # message rendered at activation
    ack_time: float | None = None  # when this activation was acknowledged
    ack_user: str | None = None  # who acknowledged it
    history: tuple[tuple[float, float], ...] = ()  # rate alarms: (time, value); not stored

    @property
    def shelved(self) -> bool:
        return self.shelved_until is not None or self.shelved_oneshot

    @property
    def standing(self) -> bool:
        """In front of the operator: active or waiting for acknowledgement, not masked."""
        return not self.masked and (self.active or self.unacknowledged)

    @property
    def masked(self) -> bool:
        """Shelved, suppressed or out of service: the life cycle is not announced."""
        return self.out_of_service or self.shelved or self.suppressed

    @property
    def state(self) -> str:
        if self.out_of_service:
            return "out_of_service"
        if self.shelved:
            return "shelved"
        if self.suppressed:
            return "suppressed"
        if self.active and self.latched:
            return "latched"
        if self.active:
            return "unacknowledged" if self.unacknowledged else "acknowledged"
        return "returned_unacknowledged" if self.unacknowledged else "normal"

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict (rate history is not kept: a restart starts it afresh). Every
        stored field is a number, a string, a bool or None, so this is ``asdict`` without
        its recursive copying (the journal compares 5,500 of these a second)."""
        d = {name: getattr(self, name) for name in _STORED}
        d["state"] = self.state
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> AlarmState:
        """Inverse of ``to_dict``; unknown keys are ignored, missing ones take defaults."""
        names = {f.name for f in fields(cls)} - {"history"}
        return cls(**{k: v for k, v in d.items() if k in names})


_STORED = tuple(f.name for f in fields(AlarmState) if f.name != "history")

# the stored fields that do not change with every reading, as one tuple (made in C): what
# the journal compares to decide whether a state needs writing again
stable_key = attrgetter(*(n for n in _STORED if n not in VOLATILE))

# dataclasses.replace for AlarmState, without its per-field dict (the engine runs it for
# every alarm whose live value moved, on every pass): edge.records
replace_state = replacer(AlarmState)


@dataclass(frozen=True, slots=True)
class Action:
    """An operator action. ``alarm`` is the alarm name, or the priority for
    ``ack_priority``. ``duration`` (s) is for ``shelve``: None means one-shot (until the
    alarm clears). ``comment`` is the reason for shelve and out_of_service (required)."""

    kind: str  # one of ACTIONS
    alarm: str
    user: str
    comment: str = ""
    duration: float | None = None
