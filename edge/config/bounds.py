"""Sane bounds on values that pass the schema but would hurt at run time: a poll interval
that floods a PLC, a retention that deletes the history at start, a message template that
pads each alarm message to megabytes. Pure: the parts in, ``(path, message)`` out.
(The size of secret files is the secret reader's rule, not this one.)"""

from __future__ import annotations

import re
import string
from typing import TYPE_CHECKING, Any

from edge.config.yaml_lines import Path

if TYPE_CHECKING:
    from edge.config.parts import Parts

__all__ = ["BOUNDS", "MESSAGE_MAX", "WIDTH_MAX", "check_bounds"]

Problems = list[tuple[Path, str]]

# key -> (lowest, highest, why), in seconds
BOUNDS: dict[str, tuple[float, float, str]] = {
    "interval": (0.1, 3600.0, "faster polling floods a PLC with requests"),
    "timeout": (0.05, 60.0, "a timeout outside this range is not a network's"),
    "retention": (86400.0, 3650 * 86400.0, "a shorter retention deletes the history at start"),
}
MESSAGE_MAX = 500  # characters of an alarm's message template
WIDTH_MAX = 100  # a field's width or precision in a template ({value:>8.2f})
_NUMBERS = re.compile(r"\d+")


def _text(seconds: float) -> str:
    for size, unit in ((86400.0, "d"), (3600.0, "h"), (60.0, "min"), (1.0, "s")):
        if seconds >= size and (seconds / size).is_integer():
            return f"{seconds / size:g} {unit}"
    return f"{seconds:g} s" if seconds >= 1 else f"{seconds * 1000:g} ms"


def _bound(path: Path, key: str, value: float, out: Problems) -> None:
    lo, hi, why = BOUNDS[key]
    if not lo <= value <= hi:
        out.append(
            (
                (*path, key),
                f"{_text(value)} is outside {_text(lo)}..{_text(hi)} ({why})",
            )
        )


def _template(path: Path, text: str, out: Problems) -> None:
    if len(text) > MESSAGE_MAX:
        out.append((path, f"the message is {len(text)} characters; at most {MESSAGE_MAX}"))
        return
    try:
        fields = list(string.Formatter().parse(text))
    except ValueError as exc:
        out.append((path, f"the message template is not valid: {exc}"))
        return
    for _literal, name, spec, _conv in fields:
        numbers = [int(n) for n in _NUMBERS.findall(spec or "")]
        if name is not None and numbers and max(numbers) > WIDTH_MAX:
            out.append(
                (
                    path,
                    f"field {{{name}:{spec}}} asks for {max(numbers)} characters; "
                    f"a width or precision is at most {WIDTH_MAX}",
                )
            )


def check_bounds(parts: Parts, out: Problems) -> None:
    for i, source in enumerate(parts.sources):
        if source is not None:
            _bound(("sources", i), "interval", source.interval, out)
            _bound(("sources", i), "timeout", source.timeout, out)
    if parts.storage is not None:
        _bound(("storage",), "retention", parts.storage.retention, out)
    for i, alarm in enumerate(parts.alarms):
        message: Any = getattr(alarm, "message", None)
        if isinstance(message, str) and message:
            _template(("alarms", i, "message"), message, out)
