"""The log of point changes: one line when a point's quality or commissioning hint
changes, so a journal of the service tells when a reading went bad and why."""

from __future__ import annotations

from collections.abc import Mapping

from edge.logs import get_logger
from edge.model import PointState

__all__ = ["PointLog"]


class PointLog:
    """Logs a point whose quality or commissioning hint changed: one line per change, with
    the point's name. A point waiting for its first data (``no_data``) is not news, nor is
    its first good pass after that; the first bad or hinted pass is."""

    def __init__(self) -> None:
        self._marks: dict[str, tuple[int, str | None, str | None]] = {}
        self._log = get_logger(component="points")

    def observe(self, points: Mapping[str, PointState]) -> None:
        marks = self._marks
        for name, p in points.items():
            q = p.quality
            mark = (int(q.level), q.reason, p.hint_text)
            before = marks.get(name)
            if mark == before:
                continue
            marks[name] = mark
            hint = mark[2]
            if _waiting(mark) or ((before is None or _waiting(before)) and q.good and not hint):
                continue
            worse = (
                before is None
                or _waiting(before)
                or mark[0] < before[0]
                or bool(hint and hint != before[2])
            )
            (self._log.warning if worse else self._log.info)(
                "point_changed",
                point=name,
                quality=q.name,
                reason=q.reason,
                hint=hint,
                was=_mark_text(before),
            )

    def keep(self, names: set[str]) -> None:
        """Forget points no longer configured (after a reload)."""
        self._marks = {k: v for k, v in self._marks.items() if k in names}


def _waiting(mark: tuple[int, str | None, str | None]) -> bool:
    return mark[1] is not None and mark[1].endswith("no_data")


def _mark_text(mark: tuple[int, str | None, str | None] | None) -> str | None:
    if mark is None:
        return None
    word = ("bad", "uncertain", "good")[mark[0]]
    return f"{word}({mark[1]})" if mark[1] else word
