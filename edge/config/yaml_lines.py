"""YAML with line numbers.

``read_yaml`` composes the document with PyYAML's safe loader and builds the plain data
itself, so it knows the line of every mapping key and sequence item (``Document.lines``).
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
MAX_NODES = 100_000  # guards against alias expansion blowing up ("billion laughs")


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


class _Builder:
    def __init__(self, loader: yaml.SafeLoader, doc: Document) -> None:
        self.loader = loader
        self.doc = doc
        self.count = 0
        self.active: set[int] = set()

    def build(self, node: yaml.Node, path: Path) -> Any:
        self.count += 1
        if self.count > MAX_NODES:
            raise ConfigError(
                [self.doc.problem(path, f"the file expands to more than {MAX_NODES} values")]
            )
        if id(node) in self.active:
            self.doc.problems.append(self.doc.problem(path, "an alias refers to itself"))
            return None
        if isinstance(node, yaml.MappingNode | yaml.SequenceNode) and node.tag not in _PLAIN:
            self.doc.problems.append(
                self.doc.problem(path, f"YAML tag {node.tag!r} is not supported")
            )
            return None
        if isinstance(node, yaml.MappingNode):
            self.active.add(id(node))
            try:
                return self._mapping(node, path)
            finally:
                self.active.discard(id(node))
        if isinstance(node, yaml.SequenceNode):
            self.active.add(id(node))
            try:
                items = []
                for i, item in enumerate(node.value):
                    self.doc.lines.setdefault((*path, i), item.start_mark.line + 1)
                    items.append(self.build(item, (*path, i)))
                return items
            finally:
                self.active.discard(id(node))
        return self._scalar(node, path)

    def _scalar(self, node: yaml.Node, path: Path) -> Any:
        """A scalar as its tag says; a value its explicit tag cannot hold (``!!float '1 s'``,
        ``!!int abc``, ``!!bool maybe``) is a problem on its line, not a traceback."""
        try:
            return self.loader.construct_object(node, deep=True)
        except yaml.MarkedYAMLError:
            raise
        except (ValueError, TypeError, KeyError, AttributeError, OverflowError):
            tag = node.tag.replace("tag:yaml.org,2002:", "!!")
            self.doc.problems.append(
                ConfigProblem(
                    format_path(path),
                    f"{node.value!r} is not a valid {tag} (drop the tag, or fix the value)",
                    self.doc.filename,
                    node.start_mark.line + 1,
                )
            )
            return None

    def _mapping(self, node: yaml.MappingNode, path: Path) -> dict[str, Any]:
        own = {id(k) for k, _ in node.value}  # keys written here, not merged from "<<"
        self.loader.flatten_mapping(node)  # resolves "<<" merge keys in place
        out: dict[str, Any] = {}
        written: set[str] = set()
        for key_node, value_node in node.value:
            line = key_node.start_mark.line + 1
            key = self._scalar(key_node, path)
            if not isinstance(key, str):
                self.doc.problems.append(
                    ConfigProblem(
                        format_path(path),
                        f"keys are names, got {key!r} (quote it if it is meant as text)",
                        self.doc.filename,
                        line,
                    )
                )
                continue
            if key in written and id(key_node) in own:
                first = self.doc.lines.get((*path, key))
                self.doc.problems.append(
                    ConfigProblem(
                        format_path((*path, key)),
                        f"key '{key}' is given twice (first on line {first})",
                        self.doc.filename,
                        line,
                    )
                )
                continue
            if id(key_node) in own:
                written.add(key)
            self.doc.lines[(*path, key)] = line  # a later pair overrides a merged one
            out[key] = self.build(value_node, (*path, key))
        return out


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


def read_yaml(text: str, filename: str) -> Document:
    """Parse one YAML document. Syntax errors raise ConfigError with the line; duplicate
    and non-text keys are collected in ``Document.problems``."""
    doc = Document(data=None, filename=filename, lines={(): 1})
    loader = _Loader(text)
    try:
        node = loader.get_single_node()
        if node is not None:
            doc.lines[()] = node.start_mark.line + 1
            doc.data = _Builder(loader, doc).build(node, ())
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
