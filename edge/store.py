"""TagStore: the latest Sample of every tag, with staleness applied at read time. Pure."""

from __future__ import annotations

from collections.abc import Iterable, Mapping

from edge.model import STALE, Sample, bad


class TagStore:
    """Holds the newest Sample per tag. ``snapshot(now)`` marks as bad/``stale`` any tag whose
    last sample arrived more than its ``stale_after`` seconds ago. No clock of its own."""

    def __init__(self, stale_after: Mapping[str, float] | None = None) -> None:
        self._latest: dict[str, Sample] = {}
        self._stale_after = dict(stale_after or {})

    def set_stale_after(self, stale_after: Mapping[str, float]) -> None:
        self._stale_after = dict(stale_after)

    def update(self, samples: Iterable[Sample]) -> None:
        for s in samples:
            prev = self._latest.get(s.tag)
            if prev is not None and s.last_good is None and not s.usable:
                # keep the last good value as context, never as a reading
                keep = prev.value if prev.usable else prev.last_good
                s = Sample(s.tag, s.value, s.quality, s.source_time, s.receive_time, keep)
            self._latest[s.tag] = s

    def get(self, tag: str) -> Sample | None:
        return self._latest.get(tag)

    def forget(self, keep: Iterable[str]) -> None:
        """Drop every tag not in ``keep`` (after a reload removed them)."""
        wanted = set(keep)
        for tag in list(self._latest):
            if tag not in wanted:
                del self._latest[tag]

    def snapshot(self, now: float) -> dict[str, Sample]:
        out: dict[str, Sample] = {}
        for tag, s in self._latest.items():
            limit = self._stale_after.get(tag)
            if limit is not None and now - s.receive_time > limit and s.usable:
                s = Sample(tag, float("nan"), bad(STALE), s.source_time, s.receive_time, s.value)
            out[tag] = s
        return out

    def __len__(self) -> int:
        return len(self._latest)
