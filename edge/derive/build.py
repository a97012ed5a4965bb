"""The objects derive returns on every tick, built fast. Pure.

``reading`` and ``point_state`` give the same frozen ``edge.model.Reading`` and
``PointState`` as their constructors, at a third of the cost (``edge.records``).
``new_tuple`` is for the inline hot path of ``edge.derive.evaluate``. ``bad`` hands out
one shared ``Quality`` per reason, so the hot path allocates only what changes.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

from edge.model import Hint, Level, PointState, Quality, Reading
from edge.records import constructor

__all__ = ["EMPTY", "bad", "point_state", "reading"]

EMPTY: Mapping[str, float] = MappingProxyType({})
_BAD = Level.BAD
_BAD_Q: dict[str, Quality] = {}


def bad(reason: str) -> Quality:
    """The shared quality ``bad`` with this reason."""
    q = _BAD_Q.get(reason)
    if q is None:
        q = _BAD_Q[reason] = Quality(_BAD, reason)
    return q


# Reading(value, quality, unit) built in C (a named tuple: edge.model); the inline path of
# edge.derive.fast makes them with ``new_tuple(Reading, (value, quality, unit))``
reading = constructor(Reading)
new_tuple = tuple.__new__


_make_state = constructor(PointState)


def point_state(
    name: str,
    state: str,
    readings: dict[str, Reading],
    quality: Quality,
    hint: Hint | None,
    phase: str | None = None,
) -> PointState:
    return _make_state(name, state, readings, quality, hint, EMPTY, phase)
