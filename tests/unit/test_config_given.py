"""Config models share one set of the field names given in the file (memory at
10,000 tags), and still copy, compare and report what was given as pydantic does."""

from __future__ import annotations

import copy
import pickle

import pytest

from edge.config import parse_config
from tests.unit.test_config import BASE

# test_config's file with a second gauge tag given the same names as its drum_p
TEXT = BASE.replace(
    "      - {name: drum_t,",
    "      - {name: hdr_p, table: holding, address: 2, type: float32, unit: bar,"
    " reference: gauge}\n      - {name: drum_t,",
)


@pytest.fixture(scope="module")
def tags():
    return parse_config(TEXT).sources[0].tags


def test_models_given_the_same_names_share_one_set(tags):
    p1, p2, t1 = tags
    assert (p1.name, p2.name, t1.name) == ("drum_p", "hdr_p", "drum_t")
    assert p1.model_fields_set == {"name", "table", "address", "type", "unit", "reference"}
    assert p1.__pydantic_fields_set__ is p2.__pydantic_fields_set__
    assert t1.model_fields_set == {"name", "table", "address", "type", "unit"}
    assert "reference" not in t1.model_dump(exclude_unset=True)


def test_a_copy_with_an_update_has_a_set_of_its_own(tags):
    p1, p2, _ = tags
    moved = p1.model_copy(update={"word_order": "little"})
    assert moved.word_order == "little" and "word_order" in moved.model_fields_set
    assert "word_order" not in p2.model_fields_set  # the shared set is untouched
    assert p1.model_copy() == p1 and copy.deepcopy(p1) == p1
    assert pickle.loads(pickle.dumps(p1)) == p1
