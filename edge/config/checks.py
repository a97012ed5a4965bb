"""Checks across the whole configuration, after each piece passed the schema. Pure: the
parts in, ``(path, message)`` out, every problem collected, none raised.

Pieces that failed the schema come in as ``None`` (they have their own error already), and
names written in the file but belonging to such a piece are in ``known_names``, so a point
naming a tag whose definition is broken gets one error (the tag's), not two.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

from edge.config.bounds import check_bounds
from edge.config.flow_checks import check_flows
from edge.config.parts import Parts
from edge.config.publish import check_publish
from edge.config.rules import (
    altitude_problem,
    barometer_problem,
    channel_url_problem,
    is_loopback,
)
from edge.config.secrets import check_secret
from edge.config.signals import (
    Signal,
    parse_difference,
    parse_level,
    parse_listen,
    parse_suppress,
    resolve_signal,
    suggest,
)
from edge.config.source_checks import check_registers, check_source, tag_kind_or_none
from edge.config.yaml_lines import Path, format_path
from edge.errors import UnitError
from edge.model import CONDITIONS, LIMIT_CONDITIONS

if TYPE_CHECKING:
    from edge.config.schema import Alarm, Channel, Http, Point, Tag

__all__ = ["CONDITIONS", "Parts", "cross_check"]


Problems = list[tuple[Path, str]]


def cross_check(parts: Parts) -> Problems:
    """Every cross-reference and consistency problem of ``parts``."""
    out: Problems = []
    tags = _names(parts, out)
    points = {p.name: p for p in parts.points if p is not None}
    _check_barometer(parts, tags, out)
    for i, source in enumerate(parts.sources):
        check_source(i, source, parts.tags[i], out)
    check_registers(parts, out)
    check_bounds(parts, out)
    for i, point in enumerate(parts.points):
        if point is not None:
            _check_point(("points", i), point, tags, parts.known_names, out)
    for i, alarm in enumerate(parts.alarms):
        if alarm is not None:
            _check_alarm(("alarms", i), alarm, tags, points, parts.known_names, out)
    for i, channel in enumerate(parts.notify):
        if channel is not None:
            _check_channel(("notify", i), channel, out)
    point_names = {p.name for p in parts.points if p is not None}
    for i, channel in enumerate(parts.publish):
        if channel is not None:
            check_publish(("publish", i), channel, parts.site, point_names, out)
    if parts.http is not None:
        _check_http(parts.http, out)
    if parts.storage is not None and not parts.storage.path.strip():
        out.append((("storage", "path"), "the state file path is empty"))
    check_flows(parts.flows, tags, points, parts.known_names, out)
    return out


# --- names --------------------------------------------------------------------------------


def _names(parts: Parts, out: Problems) -> dict[str, Tag]:
    """Check names (unique per kind, usable as labels and in URLs); return tags by name."""
    tags: dict[str, Tag] = {}
    groups: dict[str, list[tuple[Path, str]]] = {
        "source": [(("sources", i), s.name) for i, s in enumerate(parts.sources) if s],
        "tag": [
            (("sources", i, "tags", j), t.name)
            for i, ts in enumerate(parts.tags)
            for j, t in enumerate(ts)
            if t
        ],
        "point": [(("points", i), p.name) for i, p in enumerate(parts.points) if p],
        "alarm": [(("alarms", i), a.name) for i, a in enumerate(parts.alarms) if a],
        "channel": [(("notify", i), c.name) for i, c in enumerate(parts.notify) if c],
    }
    for kind, items in groups.items():
        first: dict[str, Path] = {}
        for path, name in items:
            where = (*path, "name")
            if not name.strip() or any(c.isspace() for c in name) or "/" in name:
                out.append((where, f"a {kind} name must be a word without spaces or '/'"))
            elif kind == "point" and "." in name:
                out.append((where, "a point name cannot contain '.' (signals are point.quantity)"))
            if name in first:
                out.append(
                    (where, f"duplicate {kind} name '{name}' (first at {format_path(first[name])})")
                )
            else:
                first[name] = path
    for ts in parts.tags:
        for t in ts:
            if t is not None:
                tags.setdefault(t.name, t)
    _builtin_names(parts, tags, out)
    return tags


def _builtin_names(parts: Parts, tags: dict[str, Tag], out: Problems) -> None:
    """The alarm engine adds ``<point>-quality``, ``<point>-saturation`` (with a deviation
    alarm), ``<source>-comm``, ``barometer-fallback`` (with a live barometer tag) and
    ``<tag>-quality`` (tags alarms watch): none may clash."""
    taken: dict[str, str] = {}

    def claim(name: str, what: str, path: Path) -> None:
        if name in taken and taken[name] != what:
            out.append((path, f"{what} and {taken[name]} would both be named '{name}'"))
        taken.setdefault(name, what)

    for i, p in enumerate(parts.points):
        if p is not None:
            claim(f"{p.name}-quality", f"the quality alarm of point '{p.name}'", ("points", i))
            if p.deviation_alarm is not None:
                what = f"the saturation alarm of point '{p.name}'"
                claim(f"{p.name}-saturation", what, ("points", i, "deviation_alarm"))
    for i, s in enumerate(parts.sources):
        if s is not None:
            claim(f"{s.name}-comm", f"the comm alarm of source '{s.name}'", ("sources", i))
    if parts.barometer is not None and parts.barometer.tag:
        claim("barometer-fallback", "the barometer fallback alarm", ("barometer", "tag"))
    for i, a in enumerate(parts.alarms):
        if a is None:
            continue
        for sig in (a.signal, a.deviation.signal if a.deviation else None):
            if sig in tags:
                claim(
                    f"{sig}-quality", f"the quality alarm of tag '{sig}'", ("alarms", i, "signal")
                )
    for i, a in enumerate(parts.alarms):
        if a is not None and a.name in taken:
            out.append(
                (("alarms", i, "name"), f"alarm name '{a.name}' is taken by {taken[a.name]}")
            )


# --- barometer ----------------------------------------------------------------------------


def _check_barometer(parts: Parts, tags: dict[str, Tag], out: Problems) -> None:
    b = parts.barometer
    if b is None:
        return
    p: Path = ("barometer",)
    if b.fixed is None and b.altitude is None:
        out.append((p, "give one of fixed (e.g. '101.325 kPa') or altitude (e.g. '420 m')"))
    if b.fixed is not None and b.altitude is not None:
        out.append(((*p, "altitude"), "give one of fixed or altitude, not both"))
    if b.fixed is not None:
        if b.fixed.reference not in (None, "absolute"):
            out.append(((*p, "fixed"), "a barometric pressure is absolute; drop the g/vac"))
        elif (why := barometer_problem(b.fixed.value)) is not None:
            out.append(((*p, "fixed"), why))
    if b.altitude is not None and (why := altitude_problem(b.altitude)) is not None:
        out.append(((*p, "altitude"), why))
    if b.max_age <= 0:
        out.append(((*p, "max_age"), "must be longer than 0 s"))
    if b.plausible is not None:
        lo, hi = b.plausible
        if any(q.reference not in (None, "absolute") for q in (lo, hi)):
            out.append(((*p, "plausible"), "a barometric band is absolute; drop the g/vac"))
        elif lo.value >= hi.value:
            out.append(((*p, "plausible"), "the low end must be below the high end"))
    if b.tag is not None:
        tag = tags.get(b.tag)
        if tag is None:
            if b.tag not in parts.known_names:
                out.append(((*p, "tag"), f"no tag named '{b.tag}'{suggest(b.tag, tags)}"))
        elif tag_kind_or_none(tag) != "pressure":
            out.append(((*p, "tag"), f"tag '{b.tag}' is not a pressure (unit {tag.unit!r})"))
        elif tag.reference != "absolute":
            out.append(
                (
                    (*p, "tag"),
                    f"tag '{b.tag}' must read absolute pressure to serve as the barometer, "
                    f"it is {tag.reference or 'without reference'}",
                )
            )


# --- points and alarms --------------------------------------------------------------------


def _check_point(p: Path, point: Point, tags: dict[str, Tag], known: set[str], out: Problems):
    for key, want in (("pressure", "pressure"), ("temperature", "temperature")):
        name = getattr(point, key)
        if name is None:
            continue
        tag = tags.get(name)
        if tag is None:
            if name not in known:
                out.append(((*p, key), f"no tag named '{name}'{suggest(name, tags)}"))
            continue
        kind = tag_kind_or_none(tag)
        if kind is not None and kind != want:
            out.append(((*p, key), f"tag '{name}' has unit {tag.unit!r}, not a {want} unit"))
        elif tag.reference == "differential":
            out.append(
                (
                    (*p, key),
                    f"tag '{name}' reads a differential pressure; a point needs a line pressure",
                )
            )
    if point.tolerance <= 0:
        out.append(((*p, "tolerance"), "must be more than 0 K"))
    if point.band is not None and point.band <= 0:
        out.append(((*p, "band"), "must be more than 0 K"))
    if point.deviation_alarm is not None:
        if point.state != "saturated":
            out.append(((*p, "deviation_alarm"), "only saturated points have a deviation"))
        elif point.temperature is None:
            out.append(((*p, "deviation_alarm"), "a deviation needs a temperature tag"))


def _check_alarm(
    p: Path,
    alarm: Alarm,
    tags: dict[str, Tag],
    points: dict[str, Point],
    known: set[str],
    out: Problems,
) -> None:
    def resolve(text: str, path: Path) -> Signal | None:
        try:
            return resolve_signal(text, tags, points)
        except UnitError as exc:  # the tag's unit is wrong: reported on the tag
            del exc
            return None
        except ValueError as exc:
            point = text.rpartition(".")[0]
            broken = (text in known and text not in tags) or (
                point in known and point not in points
            )
            if not broken:  # a tag or point whose own definition failed: reported there
                out.append((path, str(exc)))
            return None

    signal = resolve(alarm.signal, (*p, "signal"))
    given = [c for c in CONDITIONS if getattr(alarm, c) is not None]
    if not given:
        out.append((p, f"an alarm needs one condition: {', '.join(CONDITIONS)}"))
    for extra in given[1:]:
        out.append(
            ((*p, extra), f"an alarm has one condition; it has {given[0]} and {extra} (split it)")
        )
    if signal is not None:
        for c in LIMIT_CONDITIONS:
            if getattr(alarm, c) is not None:
                _try(out, (*p, c), parse_level, getattr(alarm, c), signal)
        if alarm.rate is not None:
            _try(out, (*p, "rate", "limit"), parse_difference, alarm.rate.limit, signal)
        if alarm.deadband is not None:
            _try(out, (*p, "deadband"), parse_difference, alarm.deadband, signal)
    if alarm.deviation is not None:
        other = resolve(alarm.deviation.signal, (*p, "deviation", "signal"))
        if signal is not None and other is not None:
            if other.kind != signal.kind:  # pressures in other references: via the barometer
                out.append(
                    (
                        (*p, "deviation", "signal"),
                        f"'{other.text}' ({_describe(other)}) cannot be compared with "
                        f"'{signal.text}' ({_describe(signal)})",
                    )
                )
            _try(out, (*p, "deviation", "limit"), parse_difference, alarm.deviation.limit, signal)
    if alarm.suppress_when is not None:
        sp = (*p, "suppress_when")
        try:
            name, _op, quantity = parse_suppress(alarm.suppress_when)
        except ValueError as exc:
            out.append((sp, str(exc)))
        else:
            cond = resolve(name, sp)
            if cond is not None:
                _try(out, sp, parse_level, quantity, cond)
    if alarm.realarm is not None and alarm.realarm <= 0:
        out.append(((*p, "realarm"), "must be longer than 0 s"))


def _describe(s: Signal) -> str:
    word = "temperature difference" if s.kind == "tdiff" else s.kind
    return f"{s.reference} {word}" if s.reference else word


def _try(out: Problems, path: Path, fn: Callable[[str, Signal], float], text: str, s: Signal):
    try:
        return fn(text, s)
    except (UnitError, ValueError) as exc:
        out.append((path, str(exc)))
        return None


# --- channels and secrets -----------------------------------------------------------------


def _check_channel(p: Path, ch: Channel, out: Problems) -> None:
    kinds = [k for k in ("webhook", "alertmanager") if getattr(ch, k) is not None]
    if len(kinds) != 1:
        where = (*p, kinds[1]) if len(kinds) > 1 else p
        out.append((where, "a channel is either webhook or alertmanager: give exactly one URL"))
    for key in kinds:
        url = getattr(ch, key)
        problem = channel_url_problem(url, ch.allow_plain_http)
        if problem:
            out.append(((*p, key), problem))
    if ch.timeout <= 0:
        out.append(((*p, "timeout"), "must be longer than 0 s"))
    check_secret(p, ch, "secret", out)


def _check_http(http: Http, out: Problems) -> None:
    try:
        host, _ = parse_listen(http.listen)
    except ValueError as exc:
        out.append((("http", "listen"), str(exc)))
    else:
        if not is_loopback(host) and not (http.token_env or http.token_file):
            out.append(
                (
                    ("http", "listen"),
                    f"listening on {host} opens the API to the network: give token_env or "
                    "token_file, or listen on 127.0.0.1",
                )
            )
    check_secret(("http",), http, "token", out)
