"""TagStore: the latest Sample of every tag, with staleness applied at read time. Pure."""

from __future__ import annotations

from collections.abc import Iterable, Mapping

from edge.model import STALE, Level, Sample, bad

_BAD = Level.BAD


class TagStore:
    """Holds the newest Sample per tag. ``snapshot(now)`` marks as bad/``stale`` any tag whose
    last sample arrived more than its ``stale_after`` seconds ago. No clock of its own."""

    def __init__(self, stale_after: Mapping[str, float] | None = None) -> None:
        self._latest: dict[str, Sample] = {}
        self._stale_after = dict(stale_after or {})

    def set_stale_after(self, stale_after: Mapping[str, float]) -> None:
        self._stale_after = dict(stale_after)

    def update(self, samples: Iterable[Sample]) -> None:
        latest = self._latest
        for s in samples:
            # not usable (bad, or not a finite number: value - value is NaN) and no context
            if s.last_good is None and (s.quality.level is _BAD or s.value - s.value != 0.0):
                prev = latest.get(s.tag)
                if prev is not None:
                    # keep the last good value as context, never as a reading
                    keep = prev.value if prev.usable else prev.last_good
                    s = Sample(s.tag, s.value, s.quality, s.source_time, s.receive_time, keep)
            latest[s.tag] = s

    def get(self, tag: str) -> Sample | None:
        return self._latest.get(tag)

    def forget(self, keep: Iterable[str]) -> None:
        """Drop every tag not in ``keep`` (after a reload removed them)."""
        wanted = set(keep)
        for tag in list(self._latest):
            if tag not in wanted:
                del self._latest[tag]

    def snapshot(self, now: float) -> dict[str, Sample]:
        out = dict(self._latest)
        limits = self._stale_after
        for tag, s in self._latest.items():
            limit = limits.get(tag)
            if limit is not None and now - s.receive_time > limit and s.usable:
                out[tag] = Sample(
                    tag, float("nan"), bad(STALE), s.source_time, s.receive_time, s.value
                )
        return out

    def __len__(self) -> int:
        return len(self._latest)
