"""How long to wait before trying again: one rule for the sources' reconnects, the
notification and publish channels' retries and the supervisor's restarts. Pure.

After ``failures`` failures in a row (1, 2, 3 ...) the wait is ``base`` doubled each time,
capped at ``cap``, then spread over the upper half of that by ``rand`` (in [0, 1)), so
that many monitors retrying the same gateway or receiver do not arrive in step::

    wait = min(cap, base * 2 ** (failures - 1)) * (0.5 + 0.5 * rand)
"""

from __future__ import annotations

import math

__all__ = ["backoff_delay"]


def backoff_delay(failures: int, *, base: float, cap: float, rand: float) -> float:
    """Seconds to wait after ``failures`` (>= 1; fewer count as 1) failures in a row."""
    exponent = min(max(failures - 1, 0), 62)
    ceiling = min(cap, base * math.pow(2.0, exponent))
    return ceiling * (0.5 + 0.5 * rand)
