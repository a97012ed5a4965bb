"""Report by exception: which point figures and source states are worth a message. Pure.

A point is reported when, since it was last reported,

- its measured pressure moved by at least the pressure deadband (Pa),
- its measured temperature moved by at least the temperature deadband (K),
- its quality (level or reason), commissioning hint or measured phase changed,
- or nothing was sent for ``max_silence`` seconds (a heartbeat that says "still this value").

The deadband applies to the measured values, as report by exception does on a process value
(common practice); the figures derived from them (Tsat, superheat, enthalpy ...) go out with
every message. It is measured against the last *reported* value, not the last seen one, so
a slow drift is reported once it has drifted a deadband.

A source is reported when it goes up or down, or after ``max_silence``.

This runs on every evaluation pass over every point, so it compares as little as it can:
two floats and a few identities per point.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from edge.model import PointState

__all__ = [
    "Deadband",
    "Reporter",
    "hints_of",
    "phase_of",
]


@dataclass(frozen=True, slots=True)
class Deadband:
    """Deadbands of one point: measured pressure in Pa, measured temperature in K."""

    pressure: float = 1000.0
    temperature: float = 0.2


def hints_of(p: PointState) -> tuple[str, ...]:
    hints = getattr(p, "hints", None)
    if hints:
        return tuple(str(h) for h in hints)
    return (str(p.hint),) if p.hint else ()  # a Hint object reads as its sentence


def phase_of(p: PointState) -> str | None:
    phase = getattr(p, "phase", None)
    if phase is None:
        return None
    return str(getattr(phase, "value", phase))


def _within(value: float | None, before: float | None, width: float) -> bool:
    """Both unknown, or both known and closer than ``width``."""
    if value is None:
        return before is None
    return before is not None and abs(value - before) < width


def _known(value: float | None) -> float | None:
    return value if value is not None and value == value else None  # NaN -> None


@dataclass
class Reporter:
    """Remembers what was last reported per point and source; ``points`` and ``sources``
    return the names due now and record them as reported."""

    max_silence: float = 60.0
    default: Deadband = field(default_factory=Deadband)
    per_point: Mapping[str, Deadband] = field(default_factory=dict)
    _points: dict[str, tuple[Any, ...]] = field(default_factory=dict)
    _sources: dict[str, tuple[float, bool]] = field(default_factory=dict)

    def points(self, points: Mapping[str, PointState], now: float) -> list[str]:
        due: list[str] = []
        sent = self._points
        silence, default, per_point = self.max_silence, self.default, self.per_point
        for name, p in points.items():
            readings = p.readings
            pr, tr = readings.get("pressure"), readings.get("temperature")
            pv = _known(pr.value) if pr is not None else None
            tv = _known(tr.value) if tr is not None else None
            q, hint, phase = p.quality, p.hint, getattr(p, "phase", None)
            last = sent.get(name)
            if last is not None and now - last[0] < silence:
                _, lp, lt, lq, lh, lph = last
                if (q is lq or q == lq) and (hint is lh or hint == lh) and phase == lph:
                    band = per_point.get(name, default) if per_point else default
                    if _within(pv, lp, band.pressure) and _within(tv, lt, band.temperature):
                        continue
            sent[name] = (now, pv, tv, q, hint, phase)
            due.append(name)
        return due

    def sources(self, health: Mapping[str, Any], now: float) -> list[str]:
        due: list[str] = []
        for name, h in health.items():
            up = bool(getattr(h, "up", False))
            last = self._sources.get(name)
            if last is not None and last[1] == up and now - last[0] < self.max_silence:
                continue
            self._sources[name] = (now, up)
            due.append(name)
        return due

    def forget(self, keep_points: Iterable[str], keep_sources: Iterable[str]) -> None:
        """Drop what is no longer configured (after a reload)."""
        kp, ks = set(keep_points), set(keep_sources)
        self._points = {k: v for k, v in self._points.items() if k in kp}
        self._sources = {k: v for k, v in self._sources.items() if k in ks}

    def reset(self) -> None:
        """Report everything again on the next pass (after a birth, values start afresh)."""
        self._points.clear()
        self._sources.clear()
