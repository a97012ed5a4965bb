"""edge.records: the fast constructor and replace give what the dataclass machinery gives."""

from __future__ import annotations

import dataclasses

import pytest

from edge.alarms.state import AlarmState, replace_state
from edge.model import GOOD, Sample
from edge.records import constructor, replacer


def test_replace_state_matches_dataclasses_replace() -> None:
    s = AlarmState("pt0001-superheat-low", "high", active=True, value=3.5, history=((1.0, 2.0),))
    for changes in ({}, {"value": 4.0}, {"active": False, "since": 12.0, "quality": "bad"}):
        assert replace_state(s, **changes) == dataclasses.replace(s, **changes)
    assert replace_state(s, value=9.0) is not s
    assert s.value == 3.5  # the original is untouched


def test_replace_state_refuses_unknown_fields() -> None:
    with pytest.raises(TypeError, match="no field"):
        replace_state(AlarmState("a", "low"), colour="red")


def test_constructor_matches_the_class() -> None:
    make = constructor(Sample)
    assert make("p1", 1.0, GOOD, 2.0, 3.0, None) == Sample("p1", 1.0, GOOD, 2.0, 3.0)
    sample = make("p1", 1.0, GOOD, 2.0, 3.0, None)
    assert type(sample) is Sample and sample.usable
    with pytest.raises(AttributeError):  # immutable: a named tuple (edge.model)
        sample.value = 2.0  # type: ignore[misc]


def test_classes_with_post_init_keep_the_dataclass_path() -> None:
    @dataclasses.dataclass(frozen=True, slots=True)
    class Checked:
        x: float

        def __post_init__(self) -> None:
            if self.x < 0:
                raise ValueError("negative")

    assert constructor(Checked) is Checked
    assert replacer(Checked) is dataclasses.replace
    with pytest.raises(ValueError):
        replacer(Checked)(Checked(1.0), x=-1.0)
