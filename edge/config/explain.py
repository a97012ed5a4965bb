"""pydantic's errors in words a controls engineer reads.

``translate`` turns pydantic's error list into ``(path, message)`` pairs with clean paths
(``sources[1].tags[3].word_order``: no union member names such as ``'modbus-tcp'``) and
plain messages (``expected 'big' or 'little', got 'bg' (did you mean 'big'?)``).
"""

from __future__ import annotations

import datetime
import difflib
import re
import types
from typing import Annotated, Any, Union, get_args, get_origin

from pydantic import BaseModel
from pydantic_core import ErrorDetails

from edge.config.yaml_lines import Path

__all__ = ["translate"]


def _clean_loc(loc: tuple[str | int, ...], data: Any) -> Path:
    """Follow pydantic's ``loc`` through the data, dropping parts that are not in the file
    (discriminated-union tags such as ``'modbus-tcp'``, union member names)."""
    out: list[str | int] = []
    cur: Any = data
    known = True
    for part in loc:
        if not known:
            out.append(part)
            continue
        if isinstance(cur, dict):
            if part in cur:
                out.append(part)
                cur = cur[part]
            elif isinstance(part, str) and cur.get("protocol") == part:
                continue
            else:
                out.append(part)
                known = False
        elif isinstance(cur, list) and isinstance(part, int) and 0 <= part < len(cur):
            out.append(part)
            cur = cur[part]
        elif isinstance(cur, list) and isinstance(part, int):
            out.append(part)
            known = False
        else:
            continue  # a scalar: whatever pydantic adds below it is internal
    return tuple(out)


def _unwrap(tp: Any, value: Any) -> Any:
    """Reduce Annotated / Optional / discriminated unions to the one type that applies."""
    while True:
        origin = get_origin(tp)
        if origin is Annotated:
            tp = get_args(tp)[0]
        elif origin in (Union, types.UnionType):
            members = [a for a in get_args(tp) if a is not type(None)]
            models = [m for m in members if isinstance(m, type) and issubclass(m, BaseModel)]
            if len(members) == 1:
                tp = members[0]
            elif models and isinstance(value, dict):
                match = [m for m in models if _protocol_matches(m, value.get("protocol"))]
                if not match:
                    return None
                tp = match[0]
            else:
                return tp
        else:
            return tp


def _protocol_matches(model: type[BaseModel], protocol: Any) -> bool:
    f = model.model_fields.get("protocol")
    return f is not None and protocol in get_args(f.annotation)


def _type_at(root: type[BaseModel], path: Path, data: Any) -> Any:
    """The declared type of the value at ``path`` (None if unknown)."""
    tp: Any = root
    cur = data
    for part in path:
        tp = _unwrap(tp, cur)
        if tp is None:
            return None
        if isinstance(part, int):
            args = get_args(tp)
            if get_origin(tp) is list and args:
                tp = args[0]
            elif get_origin(tp) is tuple and args:
                tp = args[min(part, len(args) - 1)]
            else:
                return None
        elif isinstance(tp, type) and issubclass(tp, BaseModel) and part in tp.model_fields:
            tp = tp.model_fields[part].annotation
        else:
            return None
        cur = cur[part] if _has(cur, part) else None
    return _unwrap(tp, cur)


def _choices(root: type[BaseModel], path: Path) -> list[str]:
    """The values a discriminated union at ``path`` (ending with its key) accepts."""
    tp = _type_at(root, path[:-1], None)
    out: list[str] = []
    while get_origin(tp) is Annotated:
        tp = get_args(tp)[0]
    for member in get_args(tp):
        if isinstance(member, type) and issubclass(member, BaseModel):
            f = member.model_fields.get(str(path[-1]))
            if f is not None:
                out.extend(str(v) for v in get_args(f.annotation))
    return out


def _has(cur: Any, part: str | int) -> bool:
    if isinstance(cur, dict):
        return part in cur
    return isinstance(cur, list) and isinstance(part, int) and 0 <= part < len(cur)


def _describe(value: Any) -> str:
    if value is None:
        return "an empty value"
    if isinstance(value, dict):
        return "a mapping"
    if isinstance(value, list):
        return f"a list of {len(value)}"
    if isinstance(value, datetime.date):
        return f"the date {value.isoformat()} (quote it if it is meant as text)"
    return repr(value)


def _quoted(expected: str) -> list[str]:
    return re.findall(r"'([^']*)'", expected)


def _unknown_key(key: str, model: Any) -> str:
    if not (isinstance(model, type) and issubclass(model, BaseModel)):
        return f"unknown key '{key}'"
    names = list(model.model_fields)
    for stem in (key, key.removesuffix("s")):
        if f"{stem}_env" in names:
            return (
                f"secrets never sit in the file: use {stem}_env (an environment variable) "
                f"or {stem}_file (a file to read) instead of '{key}'"
            )
    close = difflib.get_close_matches(key, names, n=1, cutoff=0.6)
    if close:
        return f"unknown key '{key}' (did you mean '{close[0]}'?)"
    return f"unknown key '{key}'; accepted: {', '.join(names)}"


_SIMPLE = {
    "string_type": "expected text",
    "int_type": "expected a whole number",
    "int_parsing": "expected a whole number",
    "int_from_float": "expected a whole number",
    "float_type": "expected a number",
    "float_parsing": "expected a number",
    "finite_number": "expected a finite number",
    "bool_type": "expected true or false",
    "bool_parsing": "expected true or false",
    "list_type": "expected a list",
    "tuple_type": "expected a list",
    "model_type": "expected a mapping of keys",
    "model_attributes_type": "expected a mapping of keys",
    "dict_type": "expected a mapping of keys",
}


def _message(err: ErrorDetails, path: Path, root: type[BaseModel], data: Any) -> str:
    kind = err["type"]
    ctx: dict[str, Any] = dict(err.get("ctx") or {})
    value = err.get("input")
    if kind == "missing":
        return f"missing required key '{path[-1]}'"
    if kind == "extra_forbidden":
        return _unknown_key(str(path[-1]), _type_at(root, path[:-1], data))
    if kind == "literal_error":
        if path == ("version",):
            return f"unsupported config version {value!r}; this build reads version 1"
        expected = str(ctx.get("expected", ""))
        msg = f"expected {expected}, got {_describe(value)}"
        close = difflib.get_close_matches(str(value), _quoted(expected), n=1, cutoff=0.6)
        return f"{msg} (did you mean '{close[0]}'?)" if close else msg
    if kind in ("value_error", "assertion_error"):
        return str(ctx.get("error", err["msg"]))
    if kind == "union_tag_invalid":
        disc = str(ctx.get("discriminator", "")).strip("'")
        return f"unknown {disc} {ctx.get('tag')!r}; accepted: {ctx.get('expected_tags')}"
    if kind == "union_tag_not_found":
        disc = str(ctx.get("discriminator", "")).strip("'")
        choices = _choices(root, path)
        return f"missing required key '{disc}'" + (
            f"; one of: {', '.join(choices)}" if choices else ""
        )
    if kind in ("too_short", "too_long"):
        n = ctx.get("max_length") if kind == "too_long" else ctx.get("min_length")
        return f"expected {n} items, got {ctx.get('actual_length')}"
    if kind in ("greater_than_equal", "greater_than", "less_than_equal", "less_than"):
        words = {
            "greater_than_equal": ("at least", "ge"),
            "greater_than": ("more than", "gt"),
            "less_than_equal": ("at most", "le"),
            "less_than": ("less than", "lt"),
        }[kind]
        return f"must be {words[0]} {ctx.get(words[1])}, got {_describe(value)}"
    if kind in _SIMPLE:
        return f"{_SIMPLE[kind]}, got {_describe(value)}"
    text = str(err["msg"])
    return text[:1].lower() + text[1:]


def translate(
    errors: list[ErrorDetails], root: type[BaseModel], data: Any
) -> list[tuple[Path, str]]:
    """pydantic errors for ``root`` validated from ``data`` -> clean ``(path, message)``."""
    out: list[tuple[Path, str]] = []
    short_tuples: dict[Path, int] = {}
    for err in errors:
        path = _clean_loc(tuple(err["loc"]), data)
        if err["type"] in ("union_tag_invalid", "union_tag_not_found"):
            disc = str((err.get("ctx") or {}).get("discriminator", "")).strip("'")
            path = (*path, disc) if disc else path
        if err["type"] == "missing" and path and isinstance(path[-1], int):
            # a fixed-length list (scale: [raw lo, raw hi, eng lo, eng hi]) that is too short
            parent = path[:-1]
            short_tuples[parent] = max(short_tuples.get(parent, 0), path[-1] + 1)
            continue
        out.append((path, _message(err, path, root, data)))
    for parent, n in short_tuples.items():
        have = _value_at(data, parent)
        got = len(have) if isinstance(have, list) else 0
        out.append((parent, f"expected {n} items, got {got}"))
    return out


def _value_at(data: Any, path: Path) -> Any:
    cur = data
    for part in path:
        if not _has(cur, part):
            return None
        cur = cur[part]
    return cur
