"""The values alarms look at, by signal name. Pure: built from derive's output and the
TagStore snapshot.

Names:

- ``<point>.<quantity>``: a point reading (pressure absolute Pa, temperatures K, ...);
- ``<tag>``: a tag reading in SI, *in the tag's own reference* for pressure tags;
- ``<point>.quality``: the point's overall quality (value = quality level 0/1/2);
- ``source:<source>``: a source's link: good unless every tag of the source is bad for a
  communication reason (``comm_loss``, ``stale``) or has no data at all; then bad with that
  reason (the ``<source>-comm`` cause alarm reads it);
- ``barometer``: the barometric pressure in use (Pa absolute), needed when a pressure
  limit is written in another reference than its signal.

``Signals.hints`` carries the commissioning hint of each point (by point name, as text:
``PointState.hint_text``). ``Signals.barometer_only`` names the points whose only non-good
input is the barometer fallback: they are uncertain, and the ``barometer-fallback`` alarm
speaks for them, not their quality alarm.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator, Mapping
from typing import Any

from edge.config import Config
from edge.model import (
    COMM_LOSS,
    GOOD,
    NO_DATA,
    STALE,
    BarometerReading,
    Level,
    PointState,
    Quality,
    Reading,
    Sample,
    bad,
)

__all__ = ["COMM_REASONS", "Signals", "point_tags", "signals_from", "source_tags"]

COMM_REASONS = frozenset({COMM_LOSS, STALE, NO_DATA})


class Signals(Mapping[str, Reading]):
    """A read-only mapping of signal name to Reading, plus the points' hints.

    Built by ``signals_from`` over derive's points and the snapshot *by reference*: a
    signal's Reading is made when an alarm asks for it, so a pass costs what the alarms
    read, not one object per tag and per point quantity (10,000 tags, 5,000 points: ~45,000
    names a pass, of which the alarms read a few thousand). Same names, same precedence as
    the whole dict: ``barometer`` and ``source:<name>`` first, then point quantities and
    ``<point>.quality``, then tags."""

    __slots__ = (
        "_all",
        "_barometer",
        "_barometer_only",
        "_extra",
        "_hints",
        "_points",
        "_snapshot",
        "_sources",
        "_tags_of",
    )

    def __init__(
        self,
        readings: Mapping[str, Reading],
        hints: Mapping[str, str] | None = None,
        *,
        points: Mapping[str, PointState] | None = None,
        snapshot: Mapping[str, Sample] | None = None,
        sources: Mapping[str, Iterable[str]] | None = None,
        barometer: BarometerReading | None = None,
        tags_of: Mapping[str, Iterable[str]] | None = None,
        barometer_only: Iterable[str] | None = None,
    ) -> None:
        self._extra = dict(readings)
        self._barometer = barometer
        self._tags_of = tags_of
        self._barometer_only = frozenset(barometer_only) if barometer_only is not None else None
        self._hints = dict(hints) if hints is not None else None
        self._points: Mapping[str, PointState] = points if points is not None else {}
        self._snapshot: Mapping[str, Sample] = snapshot if snapshot is not None else {}
        self._sources = sources or {}
        self._all: dict[str, Reading] | None = None

    @property
    def points(self) -> Mapping[str, PointState]:
        """The point states the signals are read from."""
        return self._points

    @property
    def hints(self) -> Mapping[str, str]:
        if self._hints is None:
            self._hints = {n: t for n, p in self._points.items() if (t := p.hint_text)}
        return self._hints

    @property
    def barometer_only(self) -> frozenset[str]:
        """Points whose only non-good input is the barometer fallback (worked out once, and
        only while the barometer in use is not good)."""
        if self._barometer_only is None:
            b = self._barometer
            if b is None or b.quality.good:
                self._barometer_only = frozenset()
            else:
                tags_of = self._tags_of
                self._barometer_only = frozenset(
                    name
                    for name, p in self._points.items()
                    if _barometer_only(
                        p, tags_of.get(name) if tags_of is not None else None, self._snapshot, b
                    )
                )
        return self._barometer_only

    def get(self, name: str, default: Any = None) -> Any:  # the engine's lookup: no raise
        r = self._extra.get(name)
        if r is not None:
            return r
        if name.startswith("source:"):
            tags = self._sources.get(name[7:])
            if tags is not None:
                q = _link_quality(tags, self._snapshot)
                r = self._extra[name] = Reading(float(q.level), q)
                return r
        point, dot, quantity = name.rpartition(".")
        if dot:
            p = self._points.get(point)
            if p is not None:
                if quantity == "quality":
                    return _quality_reading(p.quality)
                r = p.readings.get(quantity)
                if r is not None:
                    return r
        s = self._snapshot.get(name)
        if s is not None:
            return _tag_reading(s)
        return default

    def quality_of(self, name: str) -> Quality | None:
        """The quality of signal ``name`` (None: no such signal), what a quality alarm at
        rest reads: a point's ``.quality`` straight from the point, without a Reading."""
        if name.endswith(".quality") and name not in self._extra:
            p = self._points.get(name[:-8])
            if p is not None:
                return p.quality
        r = self.get(name)
        return None if r is None else r.quality

    def __getitem__(self, name: str) -> Reading:
        r = self.get(name)
        if r is None:
            raise KeyError(name)
        return r  # type: ignore[no-any-return]

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and self.get(name) is not None

    def _every(self) -> dict[str, Reading]:
        """Every signal as one dict (iteration and len; the engine never needs it)."""
        if self._all is None:
            out: dict[str, Reading] = {t: _tag_reading(s) for t, s in self._snapshot.items()}
            for name, p in self._points.items():
                for quantity, r in p.readings.items():
                    out[f"{name}.{quantity}"] = r
                out[f"{name}.quality"] = _quality_reading(p.quality)
            for source in self._sources:
                out[f"source:{source}"] = self[f"source:{source}"]
            out.update(self._extra)
            self._all = out
        return self._all

    def __iter__(self) -> Iterator[str]:
        return iter(self._every())

    def __len__(self) -> int:
        return len(self._every())

    def __repr__(self) -> str:
        return f"Signals({self._every()!r}, hints={dict(self.hints)!r})"


def _tag_reading(s: Sample) -> Reading:
    return Reading(s.value if s.usable else None, s.quality)


_GOOD_QUALITY_READING = Reading(float(GOOD.level), GOOD)


def _quality_reading(q: Quality) -> Reading:
    return _GOOD_QUALITY_READING if q is GOOD else Reading(float(q.level), q)


def source_tags(config: Config) -> dict[str, tuple[str, ...]]:
    """Tag names of every source, by source name (for the source comm alarms)."""
    return {s.name: tuple(t.name for t in s.tags) for s in config.sources}


def point_tags(config: Config) -> dict[str, tuple[str, ...]]:
    """Tag names each point reads, by point name."""
    return {
        p.name: tuple(t for t in (p.pressure, p.temperature) if t is not None)
        for p in config.points
    }


def _link_quality(tags: Iterable[str], snapshot: Mapping[str, Sample]) -> Quality:
    """Bad when no tag of the source delivers and every one fails for a communication
    reason (or has no data); good otherwise (a sensor fault is the point's business)."""
    get = snapshot.get
    first: Quality | None = None
    seen = False
    for t in tags:
        seen = True
        s = get(t)
        if s is None:
            continue
        q = s.quality
        if q.level is not Level.BAD or q.reason not in COMM_REASONS:
            return GOOD  # the common case: the first tag answers
        first = first or q
    if not seen:
        return GOOD
    return first if first is not None else bad(NO_DATA)


def _barometer_only(
    p: PointState,
    tags: Iterable[str] | None,
    snapshot: Mapping[str, Sample],
    barometer: BarometerReading,
) -> bool:
    if p.quality.level is not Level.UNCERTAIN or barometer.quality.good:
        return False
    if tags is None:
        return (p.quality.reason or "").startswith("barometer_")
    for t in tags:
        s = snapshot.get(t)
        if s is None or not s.quality.good or not s.usable:
            return False
    return True


def signals_from(
    points: Mapping[str, PointState],
    snapshot: Mapping[str, Sample],
    *,
    barometer: BarometerReading | None = None,
    sources: Mapping[str, Iterable[str]] | None = None,
    tags_of: Mapping[str, Iterable[str]] | None = None,
) -> Signals:
    """Every signal the alarm engine can read, from derive's points and a TagStore
    snapshot. ``sources`` (from ``source_tags(config)``) adds the source link signals;
    ``tags_of`` (from ``point_tags(config)``) tells which points only the barometer
    fallback makes uncertain.
    The two mappings are read when a signal is asked for: neither may change meanwhile
    (the evaluation pass hands over new ones each time)."""
    extra: dict[str, Reading] = {}
    if barometer is not None:
        extra["barometer"] = Reading(barometer.value, barometer.quality, "Pa")
    return Signals(
        extra,
        None,
        points=points,
        snapshot=snapshot,
        sources=sources,
        barometer=barometer,
        tags_of=tags_of,
    )
