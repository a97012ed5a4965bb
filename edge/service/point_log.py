"""The log of point changes: one line when a point's quality or commissioning hint
changes, so a journal of the service tells when a reading went bad and why.

At most ``LINES_PER_PASS`` lines a pass: when a link to a PLC drops, every point it feeds
changes at once (5,000 at 10,000 tags), and the log gets the first ones by name and one
``point_changes`` line that counts the rest by quality and reason (the source's comm alarm
says why)."""

from __future__ import annotations

from collections.abc import Mapping

from edge.logs import get_logger
from edge.model import PointState

__all__ = ["LINES_PER_PASS", "PointLog"]

LINES_PER_PASS = 20


class PointLog:
    """Logs a point whose quality or commissioning hint changed: one line per change, with
    the point's name. A point waiting for its first data (``no_data``) is not news, nor is
    its first good pass after that; the first bad or hinted pass is."""

    def __init__(self) -> None:
        # per point: the quality and hint objects last seen, and the mark they gave
        self._last: dict[str, tuple[object, object, tuple[int, str | None, str | None]]] = {}
        self._log = get_logger(component="points")

    def observe(self, points: Mapping[str, PointState]) -> None:
        last_of = self._last
        lines = 0
        more: dict[str, int] = {}  # "quality(reason)" -> points beyond LINES_PER_PASS
        for name, p in points.items():
            q, hint_obj = p.quality, p.hint
            last = last_of.get(name)
            if last is not None and last[0] is q and last[1] is hint_obj:
                continue  # the same objects as last pass (GOOD and no hint: nearly always)
            mark = (int(q.level), q.reason, p.hint_text)
            before = last[2] if last is not None else None
            last_of[name] = (q, hint_obj, mark)
            if mark == before:
                continue
            hint = mark[2]
            if _waiting(mark) or ((before is None or _waiting(before)) and q.good and not hint):
                continue
            if lines >= LINES_PER_PASS:
                key = str(q)
                more[key] = more.get(key, 0) + 1
                continue
            lines += 1
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
        if more:
            self._log.warning(
                "point_changes",
                points=sum(more.values()),
                by_quality=more,
                detail=f"{LINES_PER_PASS} points were logged by name this pass; these "
                "changed too (the API and /metrics show each one)",
            )

    def keep(self, names: set[str]) -> None:
        """Forget points no longer configured (after a reload)."""
        self._last = {k: v for k, v in self._last.items() if k in names}


def _waiting(mark: tuple[int, str | None, str | None]) -> bool:
    return mark[1] is not None and mark[1].endswith("no_data")


def _mark_text(mark: tuple[int, str | None, str | None] | None) -> str | None:
    if mark is None:
        return None
    word = ("bad", "uncertain", "good")[mark[0]]
    return f"{word}({mark[1]})" if mark[1] else word
