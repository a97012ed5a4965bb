"""How the service keeps Python's cyclic garbage collector cheap.

Almost everything an evaluation pass makes (samples, readings, point states, alarm states)
is freed by reference counting as soon as the next pass replaces it; none of it forms
cycles. CPython's collector counts allocations minus frees of container objects and runs
a young-generation pass whenever that count passes a threshold (700 by default): with
10,000 tags a pass allocates ~60,000 such objects before it frees the last pass's, so the
collector ran several times a second and traversed every live figure each time (~20 ms
per pass at 5,000 points, a fifth of the whole service's CPU).

``settle()`` (once, after start-up) moves everything loaded so far out of the collector's
sight (``gc.freeze``) and sets a young threshold that a pass's churn never reaches; the
cyclic garbage that does arise (asyncio and aiohttp make some per request) is collected by
``Pacer.tick``: the young generations every ``YOUNG_EVERY`` s, everything every
``FULL_EVERY`` s. So garbage is bounded by what ten seconds make, and the collector costs a
few milliseconds every ten seconds instead of a fifth of the CPU.
"""

from __future__ import annotations

import ctypes
import gc

__all__ = ["FULL_EVERY", "YOUNG_EVERY", "YOUNG_THRESHOLD", "Pacer", "release", "settle", "trim"]

YOUNG_THRESHOLD = 250_000  # net new container objects before an automatic young pass
YOUNG_EVERY = 10.0  # s between collections of the young generations (0 and 1)
FULL_EVERY = 300.0  # s between full collections (cycles that lived long enough to age)


def settle() -> None:
    """Collect once, freeze what is alive (it lives as long as the process), raise the
    automatic threshold above a pass's churn, and hand the start-up's freed memory back."""
    gc.collect()
    gc.freeze()
    gc.set_threshold(YOUNG_THRESHOLD, 10, 10)
    trim()


def release() -> None:
    """Free what a big one-off job (loading a config) left behind, now."""
    gc.collect()
    trim()


def trim() -> bool:
    """Give the C heap's free pages back to the system (glibc ``malloc_trim``): loading a
    10,000-tag config frees tens of MiB that would otherwise stay resident. False where
    the C library has no such call."""
    try:
        libc = ctypes.CDLL(None)
        return bool(libc.malloc_trim(0))
    except (OSError, AttributeError):
        return False


class Pacer:
    """Runs the collections ``settle`` leaves to the clock; ``tick(now)`` on every pass."""

    def __init__(self, young_every: float = YOUNG_EVERY, full_every: float = FULL_EVERY) -> None:
        self.young_every = young_every
        self.full_every = full_every
        self._young_at: float | None = None
        self._full_at: float | None = None
        self.collections = 0

    def tick(self, now: float) -> int:
        """Collect if one is due; returns the generation collected, or -1 for none."""
        if self._young_at is None or self._full_at is None:
            self._young_at, self._full_at = now, now
            return -1
        if now - self._full_at >= self.full_every or now < self._full_at:
            self._young_at = self._full_at = now
            gc.collect()
            trim()  # and what full scrapes and bursts freed since
            self.collections += 1
            return 2
        if now - self._young_at >= self.young_every or now < self._young_at:
            self._young_at = now
            gc.collect(1)
            self.collections += 1
            return 1
        return -1
