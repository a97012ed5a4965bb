"""Tiers of the history and the one way values are folded into intervals: min, mean and
max of the values that are not bad (bad ones are NaN), and the worst quality seen.
Pure: no clock, no I/O.

Tier 0 keeps every evaluation pass in windows of a minute; tier 1 keeps 1-minute intervals
in windows of an hour; tier 2 keeps 10-minute intervals in windows of a day. A tier is
made from the one below once that window is complete there, so a crash never leaves a
half-made interval. A mean of means weighs each finer interval alike.
"""

from __future__ import annotations

import math
from bisect import bisect_left
from collections.abc import Sequence
from dataclasses import dataclass

from edge.history.frames import NO_SAMPLE

__all__ = ["Run", "Tier", "choose_tier", "fold", "summary", "tiers"]

NAN = float("nan")


@dataclass(frozen=True, slots=True)
class Tier:
    index: int
    step: float  # s between intervals; 0 for every pass
    window: int  # s covered by one stored row
    keep: float  # s kept

    @property
    def label(self) -> str:
        if self.step == 0:
            return "every pass"
        return f"{self.step / 60:g} min"


def tiers(full_rate: float, minute_keep: float, retention: float) -> tuple[Tier, ...]:
    return (
        Tier(0, 0.0, 60, full_rate),
        Tier(1, 60.0, 3600, max(minute_keep, full_rate)),
        Tier(2, 600.0, 86400, max(retention, minute_keep, full_rate)),
    )


@dataclass(slots=True)
class Run:
    """Samples of one series, time-ordered: times, min, mean, max and quality (bytes)."""

    times: list[float]
    mins: list[float]
    means: list[float]
    maxs: list[float]
    quality: bytearray

    @classmethod
    def empty(cls) -> Run:
        return cls([], [], [], [], bytearray())

    def extend(self, other: Run) -> None:
        self.times.extend(other.times)
        self.mins.extend(other.mins)
        self.means.extend(other.means)
        self.maxs.extend(other.maxs)
        self.quality.extend(other.quality)

    def between(self, since: float, until: float) -> Run:
        a = bisect_left(self.times, since)
        b = bisect_left(self.times, until)
        return Run(
            self.times[a:b], self.mins[a:b], self.means[a:b], self.maxs[a:b], self.quality[a:b]
        )

    def __len__(self) -> int:
        return len(self.times)


def fold(run: Run, start: float, step: float, n: int, *, keep_empty: bool = True) -> Run:
    """``run`` folded into ``n`` intervals of ``step`` from ``start``. An interval's time
    is its start; one without samples is NaN with quality NO_SAMPLE (left out unless
    ``keep_empty``); one whose samples are all bad is NaN with quality 0."""
    out = Run.empty()
    times, mins, means, maxs, quality = run.times, run.mins, run.means, run.maxs, run.quality
    o_t, o_mn, o_me, o_mx, o_q = out.times, out.mins, out.means, out.maxs, out.quality
    a = bisect_left(times, start)
    for i in range(n):
        t0 = start + i * step
        b = bisect_left(times, t0 + step, a)
        if a == b:
            if keep_empty:
                _append(out, t0, NAN, NAN, NAN, NO_SAMPLE)
            continue
        q = quality[a:b]
        if b - a == 1 and q[0] == 2:
            mn, mean, mx, worst = mins[a], means[a], maxs[a], 2
        else:
            mn, mean, mx, worst = summary(mins[a:b], means[a:b], maxs[a:b], q)
            if worst == NO_SAMPLE and not keep_empty:
                a = b
                continue
        o_t.append(t0)
        o_mn.append(mn)
        o_me.append(mean)
        o_mx.append(mx)
        o_q.append(worst)
        a = b
    return out


def summary(
    mins: Sequence[float], means: Sequence[float], maxs: Sequence[float], quality: bytes
) -> tuple[float, float, float, int]:
    """Min, mean and max of one interval's samples that are not bad (NaN), and the worst
    quality seen (NO_SAMPLE when there is none); NaN when no value is there."""
    count = len(quality)
    if count and quality.count(2) == count:  # all good: the usual case, at C speed
        return min(mins), math.fsum(means) / count, max(maxs), 2
    # an interval folded before may be worst-bad yet have values
    ok = [j for j in range(count) if means[j] == means[j]]  # not NaN
    present = [x for x in quality if x != NO_SAMPLE]
    worst = min(present) if present else NO_SAMPLE
    if not ok:
        return NAN, NAN, NAN, worst
    mn = min(mins[j] for j in ok)
    mx = max(maxs[j] for j in ok)
    return mn, math.fsum(means[j] for j in ok) / len(ok), mx, worst


def _append(out: Run, t: float, mn: float, mean: float, mx: float, q: int) -> None:
    out.times.append(t)
    out.mins.append(mn)
    out.means.append(mean)
    out.maxs.append(mx)
    out.quality.append(q)


def choose_tier(
    ladder: Sequence[Tier], since: float, now: float, step: float, pass_step: float = 1.0
) -> Tier:
    """The coarsest tier no coarser than ``step`` that still reaches back to ``since``;
    when none of those reaches back that far, the finest tier that does; when no tier
    does, the coarsest one."""
    fine_enough = [t for t in ladder if max(t.step, pass_step) <= step]
    reaching = [t for t in ladder if now - t.keep <= since]
    for t in reversed(fine_enough):
        if t in reaching:
            return t
    if reaching:
        return reaching[0]
    return ladder[-1]
