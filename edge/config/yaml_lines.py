"""YAML with line numbers.

``read_yaml`` reads the parser's events (PyYAML's safe loader; libyaml's when PyYAML has
it) and builds the plain data itself, so it knows the line of every mapping key and
sequence item (``Document.lines``).
Only plain mappings, lists and scalars are built: a tag asking for an object is refused.
"""

from __future__ import annotations

import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any

import yaml

from edge.errors import ConfigError, ConfigProblem

__all__ = ["Document", "Path", "format_path", "parse_path", "read_yaml"]

Path = tuple[str | int, ...]

_PLAIN = ("tag:yaml.org,2002:map", "tag:yaml.org,2002:seq")
# libyaml's parser when PyYAML was built with it (about 10x faster), else the pure one
_Loader: type[yaml.SafeLoader] = getattr(yaml, "CSafeLoader", yaml.SafeLoader)
# guards against alias expansion blowing up ("billion laughs"): a file may hold at most
# this many values, or one per byte of its text if that is more (only aliases go beyond)
MAX_NODES = 100_000


def format_path(path: Iterable[str | int]) -> str:
    """``("sources", 0, "tags", 2, "reference")`` -> ``"sources[0].tags[2].reference"``."""
    out = ""
    for part in path:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += f".{part}" if out else str(part)
    return out


def parse_path(text: str) -> Path:
    """``"alarms[3].deviation.signal"`` -> ``("alarms", 3, "deviation", "signal")``."""
    out: list[str | int] = []
    for name, index in re.findall(r"([^.\[\]]+)|\[(\d+)\]", text):
        out.append(int(index) if index else name)
    return tuple(out)


@dataclass
class Document:
    """Plain data from a YAML file plus the line (1-based) of every key and item."""

    data: Any
    filename: str
    lines: dict[Path, int] = field(default_factory=dict)
    problems: list[ConfigProblem] = field(default_factory=list)

    def line_of(self, path: Iterable[str | int]) -> int | None:
        """Line of ``path``, or of its nearest ancestor that exists in the file (a missing
        key is reported at the line of the mapping that lacks it)."""
        parts = tuple(path)
        while parts:
            if parts in self.lines:
                return self.lines[parts]
            parts = parts[:-1]
        return self.lines.get(())

    def problem(self, path: Iterable[str | int], message: str) -> ConfigProblem:
        parts = tuple(path)
        return ConfigProblem(format_path(parts), message, self.filename, self.line_of(parts))


_MERGE = "tag:yaml.org,2002:merge"
_VALUE = "tag:yaml.org,2002:value"
_STR = "tag:yaml.org,2002:str"
_Event = Any  # a PyYAML event (libyaml's or the pure parser's)


class _NoLines(dict[Path, int]):
    """Where the lines go when nobody asked for them: nothing is kept."""

    def __setitem__(self, key: Path, value: int) -> None:
        pass

    def setdefault(self, key: Path, default: int | None = None) -> int | None:  # type: ignore[override]
        return default


class _Builder:
    """Builds the plain data straight from the parser's events, never a node tree: a
    10,000-tag file composed into nodes took ~60 MiB (a node and two marks per scalar)
    for data that takes ~10 MiB. An anchored value keeps its events, so an alias is built
    again from them where it is used (and counts against the value limit again)."""

    def __init__(self, loader: yaml.SafeLoader, doc: Document, limit: int) -> None:
        self.loader = loader
        self.doc = doc
        self.limit = limit
        self.count = 0
        self.anchors: dict[str, list[_Event] | None] = {}  # None: still being read
        self._recording: list[tuple[str, list[_Event], list[int]]] = []  # name, events, depth
        self._replays: list[list[Any]] = []  # [events, next index] of aliases being built

    # --- events ------------------------------------------------------------------------

    def peek(self) -> _Event:
        if self._replays:
            events, i = self._replays[-1]
            return events[i]
        return self.loader.peek_event()

    def get(self) -> _Event:
        if self._replays:
            frame = self._replays[-1]
            event = frame[0][frame[1]]
            frame[1] += 1
            return event
        event = self.loader.get_event()
        anchor = getattr(event, "anchor", None)
        if anchor is not None and not isinstance(event, yaml.AliasEvent):
            self.anchors[anchor] = None
            self._recording.append((anchor, [], [0]))
        if self._recording:
            starts = isinstance(event, yaml.CollectionStartEvent)
            ends = isinstance(event, yaml.CollectionEndEvent)
            done = []
            for name, events, depth in self._recording:
                events.append(event)
                depth[0] += 1 if starts else -1 if ends else 0
                if depth[0] == 0:
                    done.append(name)
            for name in done:
                for i in range(len(self._recording) - 1, -1, -1):
                    if self._recording[i][0] == name:
                        self.anchors[name] = self._recording.pop(i)[1]
                        break
        return event

    def skip(self) -> None:
        """Read past one node (its anchors are still kept)."""
        depth = 0
        while True:
            event = self.get()
            if isinstance(event, yaml.CollectionStartEvent):
                depth += 1
            elif isinstance(event, yaml.CollectionEndEvent):
                depth -= 1
            if depth == 0:
                return

    # --- nodes -------------------------------------------------------------------------

    def build(self, path: Path) -> Any:
        event = self.get()
        if isinstance(event, yaml.AliasEvent):
            name = event.anchor
            if name not in self.anchors:
                raise yaml.composer.ComposerError(
                    None, None, f"found undefined alias {name!r}", event.start_mark
                )
            events = self.anchors[name]
            if events is None:
                self.doc.problems.append(self.doc.problem(path, "an alias refers to itself"))
                return None
            self._replays.append([events, 0])
            try:
                return self.build(path)
            finally:
                self._replays.pop()
        self.count += 1
        if self.count > self.limit:
            raise ConfigError(
                [self.doc.problem(path, f"the file expands to more than {self.limit} values")]
            )
        if isinstance(event, yaml.ScalarEvent):
            return self._scalar(event, path)
        kind = yaml.MappingNode if isinstance(event, yaml.MappingStartEvent) else yaml.SequenceNode
        tag = event.tag
        if tag is None or tag == "!":
            tag = self.loader.resolve(kind, None, event.implicit)
        if tag not in _PLAIN:
            self.doc.problems.append(self.doc.problem(path, f"YAML tag {tag!r} is not supported"))
            self._skip_rest()
            return None
        if kind is yaml.MappingNode:
            return self._mapping(event, path)
        items = []
        i = 0
        while not isinstance(self.peek(), yaml.SequenceEndEvent):
            self.doc.lines.setdefault((*path, i), self.peek().start_mark.line + 1)
            items.append(self.build((*path, i)))
            i += 1
        self.get()
        return items

    def _skip_rest(self) -> None:
        """Read to the end of the collection whose start was just read."""
        while not isinstance(self.peek(), yaml.CollectionEndEvent):
            self.skip()
        self.get()

    def _scalar(self, event: _Event, path: Path) -> Any:
        """A scalar as its tag says; a value its explicit tag cannot hold (``!!float '1 s'``,
        ``!!int abc``, ``!!bool maybe``) is a problem on its line, not a traceback."""
        tag = event.tag
        if tag is None or tag == "!":
            tag = self.loader.resolve(yaml.ScalarNode, event.value, event.implicit)
        node = yaml.ScalarNode(tag, event.value, event.start_mark, event.end_mark, event.style)
        try:
            return self.loader.construct_object(node, deep=True)
        except yaml.MarkedYAMLError:
            raise
        except (ValueError, TypeError, KeyError, AttributeError, OverflowError):
            shown = tag.replace("tag:yaml.org,2002:", "!!")
            self.doc.problems.append(
                ConfigProblem(
                    format_path(path),
                    f"{event.value!r} is not a valid {shown} (drop the tag, or fix the value)",
                    self.doc.filename,
                    event.start_mark.line + 1,
                )
            )
            return None
        finally:  # the constructor's memo would keep every node alive
            self.loader.constructed_objects.pop(node, None)

    def _key(self, path: Path) -> tuple[Any, int, bool]:
        """(key, line, is a merge key ``<<``) of the next mapping key."""
        event = self.peek()
        line = event.start_mark.line + 1
        if isinstance(event, yaml.ScalarEvent):
            tag = event.tag
            if tag is None or tag == "!":
                tag = self.loader.resolve(yaml.ScalarNode, event.value, event.implicit)
            if tag == _MERGE:
                self.get()
                return None, line, True
            if tag == _VALUE:  # "=" as a key is the text "=", as PyYAML's flattening has it
                self.get()
                return event.value, line, False
        return self.build(path), line, False

    def _mapping(self, start: _Event, path: Path) -> dict[str, Any]:
        out: dict[str, Any] = {}
        own_lines: dict[str, int] = {}
        merged: list[tuple[dict[str, Any], dict[str, int]]] = []  # from "<<", first first
        while not isinstance(self.peek(), yaml.MappingEndEvent):
            key, line, merge = self._key(path)
            if merge:
                merged.extend(self._merge_sources(path))
                continue
            if not isinstance(key, str):
                self.doc.problems.append(
                    ConfigProblem(
                        format_path(path),
                        f"keys are names, got {key!r} (quote it if it is meant as text)",
                        self.doc.filename,
                        line,
                    )
                )
                self.skip()
                continue
            if key in own_lines:
                self.doc.problems.append(
                    ConfigProblem(
                        format_path((*path, key)),
                        f"key '{key}' is given twice (first on line {own_lines[key]})",
                        self.doc.filename,
                        line,
                    )
                )
                self.skip()
                continue
            own_lines[key] = line
            self.doc.lines[(*path, key)] = line
            out[key] = self.build((*path, key))
        self.get()
        if not merged:
            return out
        # merged pairs come first (the first mapping of a list wins), then the pairs
        # written here override them
        result: dict[str, Any] = {}
        for source, source_lines in reversed(merged):
            result.update(source)
            for key, key_line in source_lines.items():
                self.doc.lines[(*path, key)] = key_line
        result.update(out)
        for key, line in own_lines.items():
            self.doc.lines[(*path, key)] = line
        return result

    def _merge_sources(self, path: Path) -> list[tuple[dict[str, Any], dict[str, int]]]:
        """The mappings a ``<<`` key merges (one mapping, or a list of them, first one
        first), each with the lines of its keys, which are this mapping's keys."""
        event = self.peek()
        mark = event.start_mark
        replaying = False
        if isinstance(event, yaml.AliasEvent):  # an alias of a list of mappings
            events = self.anchors.get(event.anchor)
            if events and isinstance(events[0], yaml.SequenceStartEvent):
                self.get()
                self._replays.append([events, 0])
                replaying = True
        try:
            if isinstance(self.peek(), yaml.SequenceStartEvent):
                self.get()
                values = []
                while not isinstance(self.peek(), yaml.SequenceEndEvent):
                    values.append(self._one_source(path))
                self.get()
            else:
                values = [self._one_source(path)]
        finally:
            if replaying:
                self._replays.pop()
        if not all(isinstance(v, dict) for v, _ in values):
            raise yaml.constructor.ConstructorError(
                "while constructing a mapping",
                None,
                "expected a mapping or list of mappings for merging",
                mark,
            )
        return values

    def _one_source(self, path: Path) -> tuple[Any, dict[str, int]]:
        value = self.build(path)  # its keys' lines land at this mapping's keys
        keys = value if isinstance(value, dict) else {}
        lines = self.doc.lines
        return value, {k: lines[(*path, k)] for k in keys if (*path, k) in lines}


def _deepest_line(text: str) -> int:
    """The line where bracket nesting, or else indentation, is deepest."""
    depth = best = 0
    best_line = line = 1
    for ch in text:
        if ch == "\n":
            line += 1
        elif ch in "[{":
            depth += 1
            if depth > best:
                best, best_line = depth, line
        elif ch in "]}":
            depth = max(0, depth - 1)
    if best > 1:
        return best_line
    indents = [len(x) - len(x.lstrip(" ")) for x in text.split("\n")]
    return indents.index(max(indents)) + 1 if indents else 1


def read_yaml(text: str, filename: str, *, lines: bool = True) -> Document:
    """Parse one YAML document. Syntax errors raise ConfigError with the line; duplicate
    and non-text keys are collected in ``Document.problems``. ``lines=False`` keeps no line
    table (for 10,000 tags it holds ~100,000 paths): problems then come without lines, so
    a caller that finds any reads the text again with them."""
    doc = Document(data=None, filename=filename, lines={(): 1} if lines else _NoLines())
    loader = _Loader(text)
    try:
        loader.get_event()  # stream start
        if not isinstance(loader.peek_event(), yaml.StreamEndEvent):
            loader.get_event()  # document start
            if lines:
                doc.lines[()] = loader.peek_event().start_mark.line + 1
            builder = _Builder(loader, doc, max(MAX_NODES, len(text)))
            doc.data = builder.build(())
            loader.get_event()  # document end
            if not isinstance(loader.peek_event(), yaml.StreamEndEvent):
                raise yaml.composer.ComposerError(
                    "expected a single document in the stream",
                    None,
                    "but found another document",
                    loader.peek_event().start_mark,
                )
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        line = mark.line + 1 if mark is not None else None
        what = " ".join(s for s in (exc.context, exc.problem) if s)
        raise ConfigError([ConfigProblem("", f"invalid YAML: {what}", filename, line)]) from exc
    except yaml.reader.ReaderError as exc:  # a character YAML does not allow, by position
        line = text.count("\n", 0, max(0, exc.position)) + 1
        what = f"U+{exc.character:04X}" if isinstance(exc.character, int) else "a byte"
        message = f"invalid YAML: character {what} is not allowed (control characters are not)"
        raise ConfigError([ConfigProblem("", message, filename, line)]) from exc
    except yaml.YAMLError as exc:
        message = " ".join(str(exc).split())  # one line
        raise ConfigError([ConfigProblem("", f"invalid YAML: {message}", filename)]) from exc
    except RecursionError as exc:
        line = _deepest_line(text)
        message = "the file is nested too deeply"
        raise ConfigError([ConfigProblem("", message, filename, line)]) from exc
    finally:
        loader.dispose()
    return doc
