"""Report by exception: which point figures and source states are worth a message. Pure.

A point is reported when, since it was last reported,

- a pressure moved by at least the pressure deadband (Pa, in the point's own figures),
- a temperature (temperature, tsat, superheat, deviation) moved by at least the temperature
  deadband (K),
- its quality, reason, phase or hints changed, or a reading came or went,
- or nothing was sent for ``max_silence`` seconds (a heartbeat that says "still this value").

A source is reported when it goes up or down, or after ``max_silence``.

The deadband is measured against the last *reported* value, not the last seen one, so a
slow drift is reported once it has drifted a deadband (common practice for report by
exception: a swinging-door of width zero).
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from typing import Any

from edge.model import PointState

__all__ = [
    "PRESSURE_QUANTITIES",
    "TEMPERATURE_QUANTITIES",
    "Deadband",
    "Reporter",
    "hints_of",
    "mark_of",
    "phase_of",
]

PRESSURE_QUANTITIES = ("pressure",)
TEMPERATURE_QUANTITIES = ("temperature", "tsat", "superheat", "deviation")


@dataclass(frozen=True, slots=True)
class Deadband:
    """Deadbands of one point: pressure in Pa, temperature (and differences) in K."""

    pressure: float = 1000.0
    temperature: float = 0.2

    def of(self, quantity: str) -> float | None:
        if quantity in PRESSURE_QUANTITIES:
            return self.pressure
        if quantity in TEMPERATURE_QUANTITIES:
            return self.temperature
        return None  # other figures follow from p and T: they never trigger on their own


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


def mark_of(p: PointState) -> tuple[Any, ...]:
    """What changes a point's meaning apart from its numbers: quality, reason, which readings
    are usable (and their qualities), phase and hints."""
    usable = tuple(
        (q, r.quality.name, r.quality.reason) for q, r in sorted(p.readings.items()) if r.usable
    )
    return (p.quality.name, p.quality.reason, usable, phase_of(p), hints_of(p))


@dataclass(slots=True)
class _Sent:
    at: float
    values: dict[str, float]
    mark: tuple[Any, ...]


@dataclass
class Reporter:
    """Remembers what was last reported per point and source; ``points`` and ``sources``
    return the names due now and record them as reported."""

    max_silence: float = 60.0
    default: Deadband = field(default_factory=Deadband)
    per_point: Mapping[str, Deadband] = field(default_factory=dict)
    _points: dict[str, _Sent] = field(default_factory=dict)
    _sources: dict[str, tuple[float, bool]] = field(default_factory=dict)

    def points(self, points: Mapping[str, PointState], now: float) -> list[str]:
        due: list[str] = []
        sent = self._points
        for name, p in points.items():
            last = sent.get(name)
            mark = mark_of(p)
            if (
                last is not None
                and now - last.at < self.max_silence
                and last.mark == mark
                and not self._moved(name, p, last.values)
            ):
                continue
            values = {
                q: float(r.value)  # type: ignore[arg-type]
                for q, r in p.readings.items()
                if r.usable
            }
            sent[name] = _Sent(now, values, mark)
            due.append(name)
        return due

    def _moved(self, name: str, p: PointState, last: Mapping[str, float]) -> bool:
        band = self.per_point.get(name, self.default)
        for q, before in last.items():
            width = band.of(q)
            if width is None:
                continue
            r = p.readings.get(q)
            if r is None or r.value is None:
                return True
            value = float(r.value)
            if not math.isfinite(value) or abs(value - before) >= width:
                return True
        return False

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
