"""Loading a config file: read it, parse the YAML with lines, validate the schema, salvage
the valid pieces and run the cross-checks, so one run reports every problem.
Call it through ``edge.config.load_config`` / ``parse_config``."""

from __future__ import annotations

import os
from pathlib import Path as FsPath
from typing import Any

from pydantic import TypeAdapter, ValidationError

from edge.config.checks import cross_check
from edge.config.explain import translate
from edge.config.fields import _FROM_FILE
from edge.config.flows import Flow, flow_names
from edge.config.parts import Parts
from edge.config.publish import Publish
from edge.config.schema import (
    SOURCE_MODELS,
    Alarm,
    Barometer,
    Channel,
    Config,
    Http,
    ModbusTag,
    OpcUaSource,
    OpcUaTag,
    Point,
    Storage,
    Tag,
)
from edge.config.yaml_lines import read_yaml
from edge.errors import ConfigError, ConfigProblem

__all__ = ["load", "load_config", "parse", "parse_config"]

# keys holding file names, resolved against the config file's folder
_FILE_KEYS = {
    "sources": ("password_file",),
    "security": ("certificate", "private_key", "server_certificate", "trust_dir"),
    "notify": ("secret_file",),
    "publish": ("password_file", "ca", "certificate", "private_key"),
    "http": ("token_file",),
    "storage": ("path",),
}


def load(path: str | os.PathLike[str]) -> Config:
    """Read, parse and check a config file. Raises ConfigError listing every problem, each
    with file, line and path; a file that cannot be read is one problem, never a traceback."""
    name = os.fspath(path)
    try:
        raw = FsPath(name).read_bytes()
    except FileNotFoundError as exc:
        raise ConfigError([ConfigProblem("", "no such file", name)]) from exc
    except IsADirectoryError as exc:
        raise ConfigError([ConfigProblem("", "this is a folder, not a config file", name)]) from exc
    except PermissionError as exc:
        raise ConfigError([ConfigProblem("", "permission denied", name)]) from exc
    except OSError as exc:
        raise ConfigError([ConfigProblem("", f"cannot read: {exc.strerror or exc}", name)]) from exc
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = raw.count(b"\n", 0, exc.start) + 1
        byte = raw[exc.start : exc.start + 1].hex()
        raise ConfigError(
            [
                ConfigProblem(
                    "", f"not UTF-8 text (byte 0x{byte}); save the file as UTF-8", name, line
                )
            ]
        ) from exc
    return parse(text, name, base_dir=os.path.dirname(os.path.abspath(name)))


def parse(text: str, filename: str = "<config>", *, base_dir: str | None = None) -> Config:
    """Parse and check config text; ``filename`` is only used in messages. With ``base_dir``,
    relative file names in the config are resolved against it."""
    # the line table costs memory (~15 MiB at 10,000 tags); it is only needed to place a
    # problem, so a file is read without one and read again with one if it has problems
    doc = read_yaml(text, filename, lines=False)
    if doc.problems or not isinstance(doc.data, dict):
        doc = read_yaml(text, filename)
    if doc.data is None:
        if doc.problems:
            raise ConfigError(doc.problems)
        raise ConfigError([ConfigProblem("", "the file is empty", filename, None)])
    if not isinstance(doc.data, dict):
        what = "a list" if isinstance(doc.data, list) else repr(doc.data)
        raise ConfigError(
            [doc.problem((), f"expected a mapping of keys (version, site, ...), got {what}")]
        )
    data = _resolve_files(doc.data, base_dir) if base_dir else doc.data
    problems: list[tuple[Any, str]] = []
    config: Config | None = None
    try:
        config = Config.model_validate(data, context=_FROM_FILE)
    except ValidationError as exc:
        problems.extend(translate(exc.errors(include_url=False), Config, data))
    parts = _parts(config) if config is not None else _salvage(data)
    parts.known_names = _raw_names(data)
    problems.extend(cross_check(parts))
    if problems and not doc.lines:
        doc = read_yaml(text, filename)
    found = doc.problems + [doc.problem(path, message) for path, message in problems]
    if found or config is None:
        found.sort(key=lambda p: (p.line or 0, p.path))
        raise ConfigError(found)
    return config


def _resolve_files(data: dict[str, Any], base: str) -> dict[str, Any]:
    def fix(d: Any, keys: tuple[str, ...]) -> Any:
        if not isinstance(d, dict):
            return d
        out = dict(d)
        for key in keys:
            v = out.get(key)
            if isinstance(v, str) and v.strip() and not os.path.isabs(os.path.expanduser(v)):
                out[key] = os.path.normpath(os.path.join(base, v))
        return out

    data = dict(data)
    if isinstance(data.get("sources"), list):
        sources = []
        for s in data["sources"]:
            s = fix(s, _FILE_KEYS["sources"])
            if isinstance(s, dict) and "security" in s:
                s["security"] = fix(s["security"], _FILE_KEYS["security"])
            sources.append(s)
        data["sources"] = sources
    if isinstance(data.get("notify"), list):
        data["notify"] = [fix(c, _FILE_KEYS["notify"]) for c in data["notify"]]
    if isinstance(data.get("publish"), list):
        data["publish"] = [fix(c, _FILE_KEYS["publish"]) for c in data["publish"]]
    for key in ("http", "storage"):
        if key in data:
            data[key] = fix(data[key], _FILE_KEYS[key])
    storage = data.get("storage")
    if isinstance(storage, dict) and isinstance(storage.get("history"), dict):
        storage["history"] = fix(storage["history"], ("path",))
    return data


def _parts(config: Config) -> Parts:
    return Parts(
        barometer=config.barometer,
        sources=list(config.sources),
        tags=[list(s.tags) for s in config.sources],
        points=list(config.points),
        alarms=list(config.alarms),
        notify=list(config.notify),
        publish=list(config.publish),
        site=config.site,
        http=config.http,
        storage=config.storage,
        flows=list(config.flows),
    )


def _valid(model: Any, value: Any) -> Any:
    try:
        return TypeAdapter(model).validate_python(value, context=_FROM_FILE)
    except ValidationError:
        return None


def _items(data: dict[str, Any], key: str) -> list[Any]:
    value = data.get(key)
    return value if isinstance(value, list) else []


def _salvage(data: dict[str, Any]) -> Parts:
    """The pieces that pass the schema on their own, each at its place (None elsewhere), so
    the cross-checks still run when some other piece is broken."""
    sources: list[Any] = []
    tags: list[list[Tag | None]] = []
    for s in _items(data, "sources"):
        protocol = s.get("protocol") if isinstance(s, dict) else None
        model = SOURCE_MODELS.get(protocol) if isinstance(protocol, str) else None
        tag_model = OpcUaTag if model is OpcUaSource else ModbusTag
        raw_tags = s.get("tags") if isinstance(s, dict) else None
        raw_tags = raw_tags if isinstance(raw_tags, list) else []
        sources.append(_valid(model, {**s, "tags": []}) if model else None)
        tags.append([_valid(tag_model, t) if model else None for t in raw_tags])
    return Parts(
        barometer=_valid(Barometer, data.get("barometer")),
        sources=sources,
        tags=tags,
        points=[_valid(Point, p) for p in _items(data, "points")],
        alarms=[_valid(Alarm, a) for a in _items(data, "alarms")],
        notify=[_valid(Channel, c) for c in _items(data, "notify")],
        publish=[_valid(Publish, c) for c in _items(data, "publish")],
        site=data.get("site") if isinstance(data.get("site"), str) else None,
        http=_valid(Http, data.get("http", {})),
        storage=_valid(Storage, data.get("storage", {})),
        flows=[_valid(Flow, f) for f in _items(data, "flows")],
    )


def _raw_names(data: dict[str, Any]) -> set[str]:
    """Every tag and point name written in the file, valid or not."""
    names: set[str] = set()
    for s in _items(data, "sources"):
        raw_tags = s.get("tags") if isinstance(s, dict) else None
        for t in raw_tags if isinstance(raw_tags, list) else []:
            if isinstance(t, dict) and isinstance(t.get("name"), str):
                names.add(t["name"])
    for p in _items(data, "points"):
        if isinstance(p, dict) and isinstance(p.get("name"), str):
            names.add(p["name"])
    return names | flow_names(data)


def load_config(path: str | os.PathLike[str]) -> Config:
    """Read, parse and check a config file. Raises ConfigError listing every problem, each
    with file, line and path; a file that cannot be read is one problem, never a traceback."""
    return load(path)


def parse_config(text: str, filename: str = "<config>", *, base_dir: str | None = None) -> Config:
    """Parse and check config text; ``filename`` is only used in messages. With ``base_dir``,
    relative file names in the config are resolved against it."""
    return parse(text, filename, base_dir=base_dir)
