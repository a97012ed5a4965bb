"""Reading the time words of a history query: ``since``/``until`` as RFC 3339 or relative
to now (``-10m``, ``-24h``, ``-7d``, ``now``) and ``step`` as a duration (``10s``, ``1 min``).
Pure: ``now`` is passed in."""

from __future__ import annotations

import math
import re
from datetime import UTC, datetime

from edge import units
from edge.errors import HistoryQueryError, UnitError

__all__ = ["parse_instant", "parse_step", "rfc3339"]

_RELATIVE = re.compile(r"^-\s*(\d+(?:\.\d+)?)\s*(s|m|min|h|d|w)$")
_SECONDS = {"s": 1.0, "m": 60.0, "min": 60.0, "h": 3600.0, "d": 86400.0, "w": 604800.0}


def parse_instant(text: str, now: float, what: str) -> float:
    """Seconds since the epoch for ``-10m``, ``now`` or an RFC 3339 time with an offset."""
    word = text.strip()
    if word == "now":
        return now
    m = _RELATIVE.match(word)
    if m:
        return now - float(m.group(1)) * _SECONDS[m.group(2)]
    try:
        when = datetime.fromisoformat(word.replace("Z", "+00:00").replace("z", "+00:00"))
    except ValueError:
        when = None
    if when is None or when.tzinfo is None:
        raise HistoryQueryError(
            f"{what}: expected an RFC 3339 time with its offset (2026-03-01T08:00:00Z) or a "
            f"relative one (-10m, -24h, -7d), got {text!r}"
        )
    return when.timestamp()


def parse_step(text: str) -> float:
    """A step in seconds, at least 1 s (``10s``, ``1 min``, ``1h``)."""
    word = text.strip()
    m = re.match(r"^(\d+(?:\.\d+)?)\s*(s|m|min|h|d)$", word)
    try:
        seconds = float(m.group(1)) * _SECONDS[m.group(2)] if m else units.parse_duration(word)
    except UnitError as exc:
        raise HistoryQueryError(f"step: {exc}") from exc
    if not math.isfinite(seconds) or seconds < 1.0:
        raise HistoryQueryError(f"step: expected at least 1 s, got {text!r}")
    return seconds


def rfc3339(t: float) -> str:
    """UTC, millisecond precision: 2026-03-01T08:00:00.000Z."""
    return datetime.fromtimestamp(t, UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")
