"""The one backoff rule (edge.backoff) that sources, channels and the supervisor share."""

from __future__ import annotations

import pytest

from edge.backoff import backoff_delay


@pytest.mark.parametrize(
    ("failures", "base", "cap", "rand", "wait"),
    [
        (1, 0.5, 30.0, 0.0, 0.25),  # first retry: half of base at the low end of the jitter
        (1, 0.5, 30.0, 1.0, 0.5),  # ... and base itself at the top
        (2, 0.5, 30.0, 1.0, 1.0),  # doubles
        (3, 0.5, 30.0, 1.0, 2.0),
        (4, 0.5, 30.0, 0.5, 3.0),  # 4 s ceiling, jitter halfway: 3/4 of it
        (10, 1.0, 300.0, 1.0, 300.0),  # 512 s capped at 300 s
        (11, 1.0, 300.0, 0.0, 150.0),  # capped, low end of the jitter: half the cap
        (40, 1.0, 0.5, 0.5, 0.375),  # a cap below base wins
        (0, 1.0, 30.0, 1.0, 1.0),  # no failure yet counts as the first
        (10**6, 1.0, 30.0, 1.0, 30.0),  # a huge count neither overflows nor exceeds the cap
    ],
)
def test_backoff_table(failures, base, cap, rand, wait):
    """Doubling from base, capped, jitter over the upper half of the capped value."""
    assert backoff_delay(failures, base=base, cap=cap, rand=rand) == pytest.approx(wait)


def test_backoff_never_falls_below_half_or_exceeds_the_ceiling():
    """Whatever the jitter draw, a wait lies in [ceiling/2, ceiling]."""
    for failures in range(1, 30):
        ceiling = min(60.0, 0.5 * 2 ** (failures - 1))
        for rand in (0.0, 0.25, 0.999999):
            wait = backoff_delay(failures, base=0.5, cap=60.0, rand=rand)
            assert ceiling / 2 <= wait <= ceiling
