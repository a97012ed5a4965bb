"""The objects derive returns on every tick, built fast. Pure.

``reading`` and ``point_state`` give the same frozen ``edge.model.Reading`` and
``PointState`` as their constructors, at a third of the cost (``edge.records`` fills the
slots directly). ``new_object`` and the ``set_*`` slot setters are for the inline hot path
of ``edge.derive.evaluate``. ``bad`` hands out one shared ``Quality`` per
reason, so the hot path allocates only what changes.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType
from typing import Any

from edge.model import Hint, Level, PointState, Quality, Reading
from edge.records import constructor, slot_setters

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


# Reading(value, quality, unit), and its slot setters for the inline path of
# edge.derive.fast (object.__new__(Reading), then each setter)
reading = constructor(Reading)
new_object = object.__new__
_R_SET = slot_setters(Reading)
if _R_SET is not None:
    set_value, set_quality, set_unit = _R_SET
else:  # pragma: no cover - only if edge.model changes Reading's fields

    def set_value(r: Any, v: Any) -> None:
        object.__setattr__(r, "value", v)

    def set_quality(r: Any, v: Any) -> None:
        object.__setattr__(r, "quality", v)

    def set_unit(r: Any, v: Any) -> None:
        object.__setattr__(r, "unit", v)


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
