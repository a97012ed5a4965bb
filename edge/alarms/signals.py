"""The values alarms look at, by signal name. Pure: built from derive's output and the
TagStore snapshot.

Names:

- ``<point>.<quantity>``: a point reading (pressure absolute Pa, temperatures K, ...);
- ``<tag>``: a tag reading in SI, *in the tag's own reference* for pressure tags;
- ``<point>.quality``: the point's overall quality (value = quality level 0/1/2);
- ``source:<source>``: a source's quality (good while any of its tags is good);
- ``barometer``: the barometric pressure in use (Pa absolute), needed when a pressure
  limit is written in another reference than its signal.

``Signals.hints`` carries the commissioning hint of each point (by point name).
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Mapping

from edge.config import Config
from edge.model import (
    GOOD,
    NO_DATA,
    BarometerReading,
    Level,
    PointState,
    Quality,
    Reading,
    Sample,
    bad,
)

__all__ = ["Signals", "signals_from", "source_tags"]


class Signals(Mapping[str, Reading]):
    """A read-only mapping of signal name to Reading, plus the points' hints."""

    __slots__ = ("_hints", "_readings")

    def __init__(
        self, readings: Mapping[str, Reading], hints: Mapping[str, str] | None = None
    ) -> None:
        self._readings = dict(readings)
        self._hints = dict(hints or {})

    @property
    def hints(self) -> Mapping[str, str]:
        return self._hints

    def __getitem__(self, name: str) -> Reading:
        return self._readings[name]

    def __iter__(self) -> Iterator[str]:
        return iter(self._readings)

    def __len__(self) -> int:
        return len(self._readings)

    def __repr__(self) -> str:
        return f"Signals({self._readings!r}, hints={self._hints!r})"


def source_tags(config: Config) -> dict[str, tuple[str, ...]]:
    """Tag names of every source, by source name (for source quality alarms)."""
    return {s.name: tuple(t.name for t in s.tags) for s in config.sources}


def _source_quality(tags: Iterable[str], snapshot: Mapping[str, Sample]) -> Quality:
    samples = [snapshot[t] for t in tags if t in snapshot]
    if any(s.quality.good and s.usable for s in samples):
        return GOOD
    for s in samples:
        if s.usable:
            return s.quality  # uncertain
    for s in samples:
        if s.quality.level is Level.BAD:
            return s.quality  # keeps its reason, e.g. comm_loss
    return bad(NO_DATA)


def signals_from(
    points: Mapping[str, PointState],
    snapshot: Mapping[str, Sample],
    *,
    barometer: BarometerReading | None = None,
    sources: Mapping[str, Iterable[str]] | None = None,
) -> Signals:
    """Every signal the alarm engine can read, from derive's points and a TagStore
    snapshot. ``sources`` (from ``source_tags(config)``) adds the source quality signals."""
    readings: dict[str, Reading] = {}
    for tag, s in snapshot.items():
        readings[tag] = Reading(s.value if s.usable else None, s.quality)
    hints: dict[str, str] = {}
    for name, p in points.items():
        for quantity, r in p.readings.items():
            readings[f"{name}.{quantity}"] = r
        readings[f"{name}.quality"] = Reading(float(p.quality.level), p.quality)
        text = p.hint_text
        if text:
            hints[name] = text
    for source, tags in (sources or {}).items():
        q = _source_quality(tags, snapshot)
        readings[f"source:{source}"] = Reading(float(q.level), q)
    if barometer is not None:
        readings["barometer"] = Reading(barometer.value, barometer.quality, "Pa")
    return Signals(readings, hints)
