"""The state of one alarm (ISA-18.2 life cycle) and the operator actions on it. Pure.

Two facts make the life cycle: ``active`` (the alarm condition stands, after delays and
latch) and ``unacknowledged`` (it waits for an operator). The state is derived:

==========  ================  ===========================
active      unacknowledged    state
==========  ================  ===========================
no          no                normal
yes         yes               unacknowledged
yes         no                acknowledged
no          yes               returned_unacknowledged
==========  ================  ===========================

Shelved, suppressed (by design) and out of service mask the life cycle and take
precedence, in the order out_of_service > shelved > suppressed. While masked, ``active``
keeps following the process silently; nothing is announced.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass, fields
from typing import Any

__all__ = ["ACTIONS", "STATES", "Action", "AlarmState"]

STATES = (
    "normal",
    "unacknowledged",
    "acknowledged",
    "returned_unacknowledged",
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
    suppressed: bool = False  # by design (suppress_when)
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
    history: tuple[tuple[float, float], ...] = ()  # rate alarms: (time, value); not stored

    @property
    def shelved(self) -> bool:
        return self.shelved_until is not None or self.shelved_oneshot

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
        if self.active:
            return "unacknowledged" if self.unacknowledged else "acknowledged"
        return "returned_unacknowledged" if self.unacknowledged else "normal"

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict (rate history is not kept: a restart starts it afresh)."""
        d = asdict(self)
        del d["history"]
        d["state"] = self.state
        return d

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> AlarmState:
        """Inverse of ``to_dict``; unknown keys are ignored, missing ones take defaults."""
        names = {f.name for f in fields(cls)} - {"history"}
        return cls(**{k: v for k, v in d.items() if k in names})


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
