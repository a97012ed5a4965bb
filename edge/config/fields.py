"""The field types every config model is built from: quantities with their unit parsed
to SI (durations, temperature differences, lengths, sizes, pressures), limits kept as text
until their signal is known, and ``Model`` (unknown keys forbidden, frozen). The lowest
layer of the config package: the schema, ``flows`` and ``publish`` models import it."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, BeforeValidator, ConfigDict, ValidationInfo

from edge import units
from edge.model import PRIORITIES, Priority
from edge.units import Quantity

__all__ = [
    "PRIORITIES",
    "Duration",
    "Length",
    "Limit",
    "Model",
    "Pressure",
    "Priority",
    "Reference",
    "Size",
    "TemperatureDifference",
]

# Set when validating a file: there a bare number is never taken as SI (``interval: 1.5``
# is an error, ``interval: 1.5 s`` is right). Code building models directly may pass SI.
_FROM_FILE = {"from_file": True}


def _needs_text(v: Any, example: str) -> str:
    if isinstance(v, bool) or not isinstance(v, str):
        raise ValueError(f"expected a quantity with a unit, e.g. '{example}', got {v!r}")
    return v


def _si_given(v: Any, info: ValidationInfo) -> bool:
    return isinstance(v, float) and not (info.context or {}).get("from_file")


def _duration(v: Any, info: ValidationInfo) -> Any:
    return v if _si_given(v, info) else units.parse_duration(_needs_text(v, "1 s"))


def _tdiff(v: Any, info: ValidationInfo) -> Any:
    return v if _si_given(v, info) else units.parse_temperature_difference(_needs_text(v, "2 K"))


def _length(v: Any, info: ValidationInfo) -> Any:
    return v if _si_given(v, info) else units.parse_length(_needs_text(v, "420 m"))


def _pressure(v: Any) -> Any:
    return units.parse_pressure(_needs_text(v, "101.325 kPa")) if not isinstance(v, Quantity) else v


def _limit(v: Any) -> Any:
    if isinstance(v, bool) or not isinstance(v, str):
        raise ValueError(
            f"expected a quantity with a unit (e.g. '11 bara', '190 degC', '2 K'), got {v!r}"
        )
    return v


_SIZE_UNITS = {"b": 1, "kb": 1e3, "mb": 1e6, "gb": 1e9, "kib": 1024, "mib": 1024**2, "gib": 1024**3}


def _size(v: Any, info: ValidationInfo) -> Any:
    if isinstance(v, int) and not isinstance(v, bool) and not (info.context or {}).get("from_file"):
        return v
    text = _needs_text(v, "1.5 GB")
    number, _, unit = text.strip().partition(" ")
    factor = _SIZE_UNITS.get(unit.strip().lower())
    try:
        value = float(number)
    except ValueError:
        value = -1.0
    if factor is None or value <= 0:
        raise ValueError(f"expected a size such as '500 MB' or '1.5 GB', got {text!r}")
    return int(value * factor)


Duration = Annotated[float, BeforeValidator(_duration)]  # seconds
Size = Annotated[int, BeforeValidator(_size)]  # bytes
TemperatureDifference = Annotated[float, BeforeValidator(_tdiff)]  # kelvin
Length = Annotated[float, BeforeValidator(_length)]  # metres
Pressure = Annotated[Quantity, BeforeValidator(_pressure)]  # Pa in its own reference
Limit = Annotated[str, BeforeValidator(_limit)]  # a quantity string, kind set by the signal


# One set per distinct set of field names given in the file, shared by every model that
# was given those: pydantic keeps a set per instance, and at 10,000 tags those sets were
# 8.3 of the configuration's 17.8 MiB (a set of five names takes 728 bytes). A shared set
# is never changed: the models are frozen, and a copy (``model_copy(update=...)`` adds
# names) gets a set of its own. (pydantic's dump wants a ``set``, not a frozenset.)
_GIVEN: dict[frozenset[str], set[str]] = {}


class Model(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, arbitrary_types_allowed=True)

    def model_post_init(self, context: Any, /) -> None:
        given = self.__pydantic_fields_set__
        shared = _GIVEN.setdefault(frozenset(given), given)
        object.__setattr__(self, "__pydantic_fields_set__", shared)

    def __copy__(self) -> Model:
        # ``model_copy(update=...)`` adds the updated names to the copy's set: its own
        copied = super().__copy__()
        object.__setattr__(copied, "__pydantic_fields_set__", set(self.__pydantic_fields_set__))
        return copied


Reference = Literal["absolute", "gauge", "vacuum", "differential"]  # differential: dp tags
