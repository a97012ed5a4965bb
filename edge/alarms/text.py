"""Operator text (who acts, why): checked before it touches any state.

One rule for the API and the ``steam-edge alarms`` command: text must be valid Unicode
that UTF-8 can carry (no lone surrogates, which is what a non-UTF-8 byte on a command line
or a JSON ``"\\ud83d"`` becomes), one line without control or direction-override
characters (they would break a log line or make a journal entry read differently from
what it holds), and at most ``USER_MAX`` / ``COMMENT_MAX`` characters. Pure.
"""

from __future__ import annotations

import unicodedata

from edge.errors import BadOperatorText

__all__ = ["COMMENT_MAX", "USER_MAX", "check_text"]

USER_MAX = 100
COMMENT_MAX = 500
# line/paragraph separators and the bidirectional embedding/override/isolate controls
_FORBIDDEN = frozenset("\u2028\u2029\u202a\u202b\u202c\u202d\u202e\u2066\u2067\u2068\u2069")


def check_text(value: object, field: str, limit: int) -> str:
    """``value`` if it is acceptable operator text for ``field``; raises BadOperatorText
    naming the field and the first offending character otherwise."""
    if not isinstance(value, str):
        raise BadOperatorText(field, f"must be text, got {type(value).__name__}")
    if len(value) > limit:
        raise BadOperatorText(field, f"is {len(value)} characters long; at most {limit}")
    for i, ch in enumerate(value):
        cat = unicodedata.category(ch)
        if cat == "Cs":
            raise BadOperatorText(
                field, f"is not valid UTF-8 text (a lone surrogate U+{ord(ch):04X} at {i})"
            )
        if cat == "Cc" or ch in _FORBIDDEN:
            raise BadOperatorText(field, f"holds a control character U+{ord(ch):04X} at {i}")
    return value
