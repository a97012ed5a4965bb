"""Point figures from one TagStore snapshot. Pure.

``points`` compiles point specs and runs the evaluation (general and fast path), ``build``
makes the returned objects fast, ``hints`` finds the configuration mistake that explains a
saturated point that does not agree with the steam tables.
"""

from __future__ import annotations

from edge.derive.points import (
    BAROMETER_BAD,
    NOT_APPLICABLE,
    REFERENCES,
    TWO_PHASE,
    PointSpec,
    compile_points,
    evaluate,
)

__all__ = [
    "BAROMETER_BAD",
    "NOT_APPLICABLE",
    "REFERENCES",
    "TWO_PHASE",
    "PointSpec",
    "compile_points",
    "evaluate",
]
