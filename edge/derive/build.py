"""The objects derive returns on every tick, built fast. Pure.

``reading`` and ``point_state`` give the same frozen ``edge.model.Reading`` and
``PointState`` as their constructors, at a third of the cost: building a frozen dataclass
through its generated ``__init__`` costs about 0.2 us per field (``object.__setattr__`` by
name), filling its slots directly does not. ``new_object`` and the ``set_*`` slot setters
are for the inline hot path of ``edge.derive.evaluate``. If the model changes shape, the
builders fall back to the constructors. ``bad`` hands out one shared ``Quality`` per
reason, so the hot path allocates only what changes.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import fields
from types import MappingProxyType, MemberDescriptorType

from edge.model import Hint, Level, PointState, Quality, Reading

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


def _slot_setters(cls: type, names: tuple[str, ...]) -> tuple[Callable[..., None], ...] | None:
    """The slot setters of a frozen slots dataclass, if its fields are exactly ``names``."""
    if tuple(f.name for f in fields(cls)) != names:
        return None
    descriptors = [cls.__dict__.get(n) for n in names]
    if not all(isinstance(d, MemberDescriptorType) for d in descriptors):
        return None
    return tuple(d.__set__ for d in descriptors)  # type: ignore[union-attr]


_R_SET = _slot_setters(Reading, ("value", "quality", "unit"))
_S_SET = _slot_setters(
    PointState, ("name", "state", "readings", "quality", "hint", "extra", "phase")
)

if _R_SET is not None and _S_SET is not None:
    set_value, set_quality, set_unit = _R_SET  # of a Reading
    _sn, _ss, _sr, _sq, _sh, _se, _sp = _S_SET
    new_object = object.__new__

    def reading(value: float | None, quality: Quality, unit: str) -> Reading:
        r = new_object(Reading)
        set_value(r, value)
        set_quality(r, quality)
        set_unit(r, unit)
        return r  # type: ignore[no-any-return]

    def point_state(
        name: str,
        state: str,
        readings: dict[str, Reading],
        quality: Quality,
        hint: Hint | None,
        phase: str | None = None,
    ) -> PointState:
        s = new_object(PointState)
        _sn(s, name)
        _ss(s, state)
        _sr(s, readings)
        _sq(s, quality)
        _sh(s, hint)
        _se(s, EMPTY)
        _sp(s, phase)
        return s  # type: ignore[no-any-return]

else:  # pragma: no cover - only if edge.model changes its fields

    def reading(value: float | None, quality: Quality, unit: str) -> Reading:
        return Reading(value, quality, unit)

    def point_state(
        name: str,
        state: str,
        readings: dict[str, Reading],
        quality: Quality,
        hint: Hint | None,
        phase: str | None = None,
    ) -> PointState:
        return PointState(name, state, readings, quality, hint, EMPTY, phase)
