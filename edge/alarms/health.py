"""Alarm-system health figures, computed from journal rows. Pure.

Figures and the guidance they follow (ISA-18.2 / IEC 62682 and EEMUA 191, from memory):

- alarm rate per 10 minutes and per hour (activations: ``raised`` events);
- flood: more than 10 alarms in 10 minutes (for one operator);
- chattering: an alarm activated 3 or more times within 60 s (looked for in the last hour);
- stale: an alarm active for more than 24 hours (shelved/suppressed/out-of-service ones are
  reported by their own state, not here);
- the 10 most frequent alarms (over the last 7 days);
- causes: the cause alarms standing now (a link down, the barometer fallback), and the
  alarms suppressed by design now (the consequences they explain, not counted as alarms).
"""

from __future__ import annotations

from collections import Counter, defaultdict
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from edge.alarms.state import AlarmState

__all__ = [
    "CHATTER_COUNT",
    "CHATTER_LOOKBACK",
    "CHATTER_WINDOW",
    "FLOOD_ALARMS",
    "FLOOD_WINDOW",
    "STALE_AFTER",
    "TOP_N",
    "TOP_WINDOW",
    "AlarmHealth",
    "chattering",
    "compute_health",
    "top_alarms",
]

FLOOD_ALARMS = 10  # more than this many alarms ...
FLOOD_WINDOW = 600.0  # ... in 10 minutes is a flood (ISA-18.2 / EEMUA 191)
CHATTER_COUNT = 3  # this many activations or more ...
CHATTER_WINDOW = 60.0  # ... within 60 s is chattering (ISA-18.2 practice)
CHATTER_LOOKBACK = 3600.0  # chattering is looked for over the last hour
STALE_AFTER = 86400.0  # active longer than 24 h is stale (ISA-18.2)
TOP_N = 10
TOP_WINDOW = 7 * 86400.0


@dataclass(frozen=True, slots=True)
class AlarmHealth:
    rate_10min: int
    rate_hour: int
    flood: bool
    chattering: list[str] = field(default_factory=list)
    stale: list[str] = field(default_factory=list)
    top: list[tuple[str, int]] = field(default_factory=list)
    causes: list[str] = field(default_factory=list)
    suppressed: list[str] = field(default_factory=list)

    def to_dict(self) -> dict[str, Any]:
        return {
            "rate_10min": self.rate_10min,
            "rate_hour": self.rate_hour,
            "flood": self.flood,
            "flood_threshold_10min": FLOOD_ALARMS,
            "chattering": list(self.chattering),
            "stale": list(self.stale),
            "top": [{"alarm": a, "count": n} for a, n in self.top],
            "causes": list(self.causes),
            "suppressed": list(self.suppressed),
        }


def chattering(
    activations: Iterable[tuple[float, str]],
    *,
    count: int = CHATTER_COUNT,
    window: float = CHATTER_WINDOW,
) -> list[str]:
    """Alarms with ``count`` or more activations inside any ``window`` seconds, sorted."""
    times: dict[str, list[float]] = defaultdict(list)
    for t, alarm in activations:
        times[alarm].append(t)
    found = []
    for alarm, ts in times.items():
        ts.sort()
        if any(ts[i + count - 1] - ts[i] <= window for i in range(len(ts) - count + 1)):
            found.append(alarm)
    return sorted(found)


def top_alarms(activations: Iterable[tuple[float, str]], n: int = TOP_N) -> list[tuple[str, int]]:
    """The ``n`` most frequent alarms, most first (ties by name)."""
    counts = Counter(alarm for _, alarm in activations)
    return sorted(counts.items(), key=lambda item: (-item[1], item[0]))[:n]


def compute_health(
    activations: Sequence[tuple[float, str]],
    states: Mapping[str, AlarmState],
    now: float,
    *,
    top: list[tuple[str, int]] | None = None,
    cause_names: Iterable[str] = (),
) -> AlarmHealth:
    """Health figures at ``now`` from activations ``(time, alarm)`` (``raised`` events; give
    at least the last hour, or the last 7 days to let this compute ``top`` too) and the
    current alarm states. ``cause_names`` are the cause alarms (any alarm named as the
    cause of a suppression counts too)."""
    past = [(t, a) for t, a in activations if t <= now]
    rate_10 = sum(1 for t, _ in past if t > now - FLOOD_WINDOW)
    rate_h = sum(1 for t, _ in past if t > now - 3600.0)
    chatter = chattering([(t, a) for t, a in past if t > now - CHATTER_LOOKBACK])
    stale = sorted(
        name
        for name, s in states.items()
        if s.active
        and not s.masked
        and s.active_since is not None
        and now - s.active_since > STALE_AFTER
    )
    if top is None:
        top = top_alarms((t, a) for t, a in past if t > now - TOP_WINDOW)
    named = set(cause_names) | {s.suppressed_by for s in states.values() if s.suppressed_by}
    causes = sorted(n for n in named if n in states and states[n].active)
    suppressed = sorted(n for n, s in states.items() if s.suppressed)
    return AlarmHealth(
        rate_10min=rate_10,
        rate_hour=rate_h,
        flood=rate_10 > FLOOD_ALARMS,
        chattering=chatter,
        stale=stale,
        top=top,
        causes=causes,
        suppressed=suppressed,
    )
