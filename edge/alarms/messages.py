"""Alarm messages: short, plain, numbers in the unit the limit was written in. Pure.

A template may use ``{value}``, ``{limit}``, ``{unit}`` (and ``{quality}``, ``{reason}``,
``{alarm}``, ``{signal}``, ``{hint}``, ``{held}``); ``{value:.1f}`` style format specs work
on the numbers. A template that cannot be rendered is returned as written: a message never
breaks an alarm.
"""

from __future__ import annotations

import math
import string
from collections.abc import Mapping, Sequence
from typing import Any

from edge.alarms.definitions import AlarmDef, display

__all__ = ["default_template", "duration_text", "number_text", "render"]

_KIND_WORDS = {"high_high": "high-high", "high": "high", "low": "low", "low_low": "low-low"}
_DIRECTION_WORDS = {"rising": "rising", "falling": "falling", "either": "changing"}


def number_text(x: float) -> str:
    """A number as an operator reads it: 4 significant figures (3 below 1), no decimals
    from 1000 up, no trailing zeros: 10.05, 185.3, 1025, 0.35."""
    if not math.isfinite(x):
        return str(x)
    a = abs(x)
    if a == 0:
        return "0"
    if a < 1:
        return f"{x:.3g}"
    decimals = 3 if a < 10 else 2 if a < 100 else 1 if a < 1000 else 0
    text = f"{x:.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def duration_text(seconds: float) -> str:
    """``90`` -> ``"90 s"``, ``1800`` -> ``"30 min"``, ``7200`` -> ``"2 h"``."""
    if seconds >= 3600 and seconds % 360 == 0:
        return f"{number_text(seconds / 3600)} h"
    if seconds >= 120 and seconds % 6 == 0:
        return f"{number_text(seconds / 60)} min"
    return f"{number_text(seconds)} s"


class _Number:
    """A number that formats as ``number_text`` unless a format spec is given."""

    __slots__ = ("x",)

    def __init__(self, x: float) -> None:
        self.x = x

    def __format__(self, spec: str) -> str:
        return format(self.x, spec) if spec else number_text(self.x)


class _Formatter(string.Formatter):
    def get_value(self, key: int | str, args: Sequence[Any], kwargs: Mapping[str, Any]) -> Any:
        if isinstance(key, str) and key in kwargs:
            return kwargs[key]
        return "{" + str(key) + "}"


_FORMATTER = _Formatter()


def _reason(quality: str) -> str:
    """``bad(comm_loss)`` -> ``comm_loss``; ``good`` -> ``good``."""
    head, _, rest = quality.partition("(")
    return rest.rstrip(")") if rest else head


def default_template(d: AlarmDef) -> str:
    if d.kind == "deviation":
        return f"{d.signal} differs from {d.other} by {{value}} {{unit}} (limit {{limit}} {{unit}})"
    if d.kind == "rate":
        word = _DIRECTION_WORDS.get(d.direction or "either", "changing")
        return f"{d.signal} {word} at {{value}} {{unit}} (limit {{limit}} {{unit}})"
    if d.kind == "quality":
        return f"{d.signal} data quality: {{quality}}"
    word = _KIND_WORDS.get(d.kind, d.kind)
    return f"{d.signal} {word}: {{value}} {{unit}} (limit {{limit}} {{unit}})"


def render(d: AlarmDef, value: float | None, quality: str, hint: str | None = None) -> str:
    """The message of ``d`` for an SI ``value`` (in the alarm's frame) and input quality.
    A falling-rate alarm shows how fast the value falls (a positive number); the event
    keeps the signed rate."""
    if value is not None and d.kind == "rate" and d.direction == "falling":
        value = -value  # "falling at 4 K/min", not "falling at -4 K/min"
    fields: dict[str, Any] = {
        "value": _Number(display(value, d)) if value is not None else "n/a",
        "limit": _Number(display(d.limit, d)) if d.limit is not None else "n/a",
        "unit": d.unit_label,
        "quality": quality,
        "reason": _reason(quality),
        "alarm": d.name,
        "signal": d.signal,
        "hint": hint or "",
        "held": "" if quality == "good" else "; its alarms are held",
    }
    template = d.message or default_template(d)
    try:
        text = _FORMATTER.vformat(template, (), fields)
    except (ValueError, IndexError, KeyError, AttributeError, TypeError):
        text = template
    if d.builtin == "saturation" and hint and "{hint}" not in template:
        text = f"{text}. {hint}"
    return text
