"""Alarm definitions: compile the ``alarms:`` section and the built-in alarms of a Config
into plain, frozen ``AlarmDef`` values the engine evaluates. Pure: no I/O, no clock.

Limits are kept in SI. A pressure limit keeps the reference it was written in
(``10 barg`` is 1e6 Pa *gauge*); the engine turns the signal into that reference at
evaluation time, with the live barometer (signal ``"barometer"``) when the references differ.
A pressure limit written without a reference (``10 bar``) is refused: confusing gauge and
absolute pressure is the mistake this project exists to prevent.

Built-in alarms, added without configuration:

- ``<source>-comm`` (cause alarm, high): the source's link is down (every tag bad with a
  communication reason: ``comm_loss``, ``stale`` or no data) for the source's
  ``quality_delay``.
- ``barometer-fallback`` (cause alarm, low; only with a live ``barometer.tag``): the live
  barometer is stale, bad, missing or implausible and the fallback value is in use.
- ``<point>-quality``: the point's data is not good for longer than ``quality_delay``. A
  point whose only non-good input is the barometer fallback is uncertain, not an alarm
  (``barometer-fallback`` speaks for it).
- ``<tag>-quality``: a tag used directly as an alarm signal (and in no point) is not good
  for its ``stale_after`` (default 10 s).
- ``<point>-saturation``: on saturated points with ``deviation_alarm``: |T - Tsat| above the
  point's tolerance; the message carries the commissioning hint from derive.

Designed suppression (ISA-18.2 state-based suppression): a quality alarm lists in
``causes`` the cause alarms that explain it (the comm alarms of the sources its tags come
from; for ``barometer-fallback``, the comm alarm of the barometer tag's source). While a
cause's condition stands but its delay runs, the explained alarm does not come in; once the
cause alarm is active, the explained alarm is suppressed (journalled, listed, counted) and
returns when the cause clears.

Alarm philosophy (``alarm_philosophy:`` and per alarm ``shelvable``): which priorities may
be shelved, the longest shelve, and alarms that may never be shelved, compiled into
``AlarmDef.shelvable`` / ``max_shelve``.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

from edge import units
from edge.config import Alarm as AlarmConfig
from edge.config import Config
from edge.config.quantities import (
    POINT_KINDS,
    comparable,
    from_si,
    parse_difference,
    parse_level,
    unit_fields,
)
from edge.config.signals import parse_suppress
from edge.errors import ConfigError, ConfigProblem, UnitError
from edge.model import CONDITIONS, PRIORITIES

__all__ = [
    "BAROMETER_ALARM",
    "BAROMETER_FALLBACK",
    "CAUSE_KINDS",
    "CONDITION_KINDS",
    "AlarmDef",
    "Suppress",
    "comm_alarm_name",
    "compile_alarms",
    "display",
    "signal_quantity",
]

# condition kinds an AlarmDef can have
CONDITION_KINDS = (*CONDITIONS, "quality")  # "quality": the built-in bad-input alarms

TAG_QUALITY_DELAY = 10.0  # s, when the tag has no stale_after
BAROMETER_ALARM = "barometer-fallback"
# barometer reasons (edge.barometer) that say the live tag is refused and the fallback used
BAROMETER_FALLBACK = (
    "barometer_no_data",
    "barometer_bad",
    "barometer_stale",
    "barometer_implausible",
)
CAUSE_KINDS = ("comm", "barometer")  # builtin values of the cause alarms


@dataclass(frozen=True, slots=True)
class Suppress:
    """Suppression by design: the alarm is suppressed while ``signal <op> limit``."""

    signal: str
    op: str  # "<" or ">"
    limit: float  # SI, in ``reference`` for pressures
    quantity: str  # pressure | temperature | tdiff | ...
    reference: str | None = None
    signal_reference: str | None = None


@dataclass(frozen=True, slots=True)
class AlarmDef:
    """One alarm, ready for the engine. Values in SI; ``unit``/``unit_kind`` say how to show
    them (the unit the limit was written in), ``unit_label`` is the text shown after them."""

    name: str
    signal: str
    kind: str  # one of CONDITION_KINDS
    priority: str
    limit: float | None = None  # SI; pressure in ``reference``; rate per minute
    deadband: float = 0.0  # SI difference, >= 0
    on_delay: float = 0.0  # s
    off_delay: float = 0.0  # s
    latch: bool = False
    realarm: float | None = None  # s
    suppress: Suppress | None = None
    message: str = ""  # template: {value} {limit} {unit} (+ {quality} {hint} {alarm})
    quantity: str = ""  # kind of the signal value: pressure | temperature | tdiff | ...
    unit: str = ""  # display unit symbol for from_si, e.g. "bar", "degC", "K"
    unit_kind: str = ""  # kind for from_si: pressure | temperature | tdiff | enthalpy ...
    unit_label: str = ""  # e.g. "barg", "degC", "K/min"
    reference: str | None = None  # pressure: the reference the limit is written in
    signal_reference: str | None = None  # pressure: the signal's own reference
    other: str | None = None  # deviation: the signal compared against
    other_reference: str | None = None
    direction: str | None = None  # rate: rising | falling | either
    builtin: str | None = None  # None, "quality", "saturation", "comm" or "barometer"
    subject: str = ""  # built-ins: the point, source or tag they watch
    reasons: tuple[str, ...] | None = None  # quality kind: only these reasons count
    causes: tuple[str, ...] = ()  # cause alarms that explain this one (designed suppression)
    shelvable: bool = True
    not_shelvable_why: str = ""  # the rule that forbids shelving, for the refusal
    max_shelve: float | None = None  # s: the longest shelve the philosophy allows

    @property
    def is_cause(self) -> bool:
        return self.builtin in CAUSE_KINDS


def display(value: float, d: AlarmDef) -> float:
    """An SI value of ``d`` in its display unit."""
    return from_si(value, d.unit, d.unit_kind)


_last_index: tuple[Config, dict[str, Any], set[str]] | None = None


def _index(config: Config) -> tuple[dict[str, Any], set[str]]:
    """Tags by name and point names of ``config``, made once per config (compiling 5,500
    alarms asked for them once each: 5,500 x 10,000 tags at start-up and on reload)."""
    global _last_index
    if _last_index is None or _last_index[0] is not config:
        _last_index = (config, config.tags(), {p.name for p in config.points})
    return _last_index[1], _last_index[2]


def signal_quantity(config: Config, signal: str) -> tuple[str, str | None]:
    """(quantity kind, pressure reference) of a signal; raises UnitError/LookupError."""
    tags, point_names = _index(config)
    if signal in tags:
        tag = tags[signal]
        info = units.unit_info(tag.unit)
        return info.kind, tag.reference if info.kind == "pressure" else None
    point, _, quantity = signal.rpartition(".")
    if point in point_names:
        if quantity not in POINT_KINDS:
            raise LookupError(
                f"point {point!r} has no quantity {quantity!r}; one of {', '.join(POINT_KINDS)}"
            )
        return POINT_KINDS[quantity]
    raise LookupError(f"unknown signal {signal!r}: expected <point>.<quantity> or a tag name")


def _quality_alarm(
    subject: str, signal: str, on_delay: float, message: str, causes: tuple[str, ...]
) -> AlarmDef:
    """The built-in ``<subject>-quality`` alarm of a point or tag."""
    return AlarmDef(
        name=f"{subject}-quality",
        signal=signal,
        kind="quality",
        priority="medium",
        on_delay=on_delay,
        message=message,
        builtin="quality",
        subject=subject,
        causes=causes,
    )


def comm_alarm_name(source: str) -> str:
    return f"{source}-comm"


class _Compiler:
    def __init__(self, config: Config) -> None:
        self.config = config
        self.problems: list[ConfigProblem] = []
        self.defs: dict[str, AlarmDef] = {}
        self.origin: dict[str, str] = {}
        self._source_of: dict[str, str] | None = None

    def problem(self, path: str, message: str) -> None:
        self.problems.append(ConfigProblem(path=path, message=message))

    def add(self, d: AlarmDef, path: str) -> None:
        if d.name in self.defs:
            self.problem(path, f"alarm name {d.name!r} is already used by {self.origin[d.name]}")
            return
        self.defs[d.name] = d
        self.origin[d.name] = path

    def source_of(self) -> dict[str, str]:
        """Source name by tag name, made once (asked once per point: 5,000 x 10,000)."""
        if self._source_of is None:
            self._source_of = {t.name: s.name for s in self.config.sources for t in s.tags}
        return self._source_of

    def causes(self, *tags: str | None) -> tuple[str, ...]:
        sources = self.source_of()
        names = {comm_alarm_name(sources[t]) for t in tags if t is not None and t in sources}
        return tuple(sorted(names))

    def cause_alarms(self) -> None:
        for i, s in enumerate(self.config.sources):
            self.add(
                AlarmDef(
                    name=comm_alarm_name(s.name),
                    signal=f"source:{s.name}",
                    kind="quality",
                    priority="high",
                    on_delay=s.quality_delay,
                    message=(
                        f"Source {s.name}: communication lost ({{reason}}); "
                        "the quality alarms of its points are suppressed"
                    ),
                    builtin="comm",
                    subject=s.name,
                ),
                f"sources[{i}]",
            )
        tag = self.config.barometer.tag
        if tag is not None:
            self.add(
                AlarmDef(
                    name=BAROMETER_ALARM,
                    signal="barometer",
                    kind="quality",
                    priority="low",
                    message=(
                        f"Barometer {tag} not used ({{reason}}); gauge and vacuum pressures "
                        "use the fallback {value} {unit} and are uncertain"
                    ),
                    quantity="pressure",
                    unit="kPa",
                    unit_kind="pressure",
                    unit_label="kPa abs",
                    builtin="barometer",
                    subject="barometer",
                    reasons=BAROMETER_FALLBACK,
                    causes=self.causes(tag),
                ),
                "barometer.tag",
            )

    def builtins(self) -> None:
        self.cause_alarms()
        for i, p in enumerate(self.config.points):
            self.add(
                _quality_alarm(
                    p.name,
                    f"{p.name}.quality",
                    p.quality_delay,
                    f"Point {p.name} data quality: {{quality}}{{held}}",
                    self.causes(p.pressure, p.temperature),
                ),
                f"points[{i}]",
            )
            if p.deviation_alarm is None:
                continue
            if p.state != "saturated":
                self.problem(
                    f"points[{i}].deviation_alarm",
                    f"only saturated points have a saturation deviation alarm "
                    f"(this one is {p.state})",
                )
                continue
            tol = p.tolerance
            self.add(
                AlarmDef(
                    name=f"{p.name}-saturation",
                    signal=f"{p.name}.deviation",
                    kind="high",
                    priority=p.deviation_alarm.priority,
                    limit=tol,
                    deadband=min(0.5, tol / 2.0),
                    on_delay=p.deviation_alarm.on_delay,
                    message=(
                        f"Point {p.name} is {{value}} {{unit}} away from saturation "
                        f"(tolerance {{limit}} {{unit}})"
                    ),
                    quantity="tdiff",
                    unit="K",
                    unit_kind="tdiff",
                    unit_label="K",
                    builtin="saturation",
                    subject=p.name,
                    shelvable=p.deviation_alarm.shelvable,
                ),
                f"points[{i}].deviation_alarm",
            )

    def tag_quality(self, used: dict[str, str]) -> None:
        tags = self.config.tags()
        in_points = {t for p in self.config.points for t in (p.pressure, p.temperature)}
        for tag, path in used.items():
            if tag not in tags or tag in in_points:
                continue  # a point's quality alarm already speaks for its tags
            self.add(
                _quality_alarm(
                    tag,
                    tag,
                    tags[tag].stale_after or TAG_QUALITY_DELAY,
                    f"Tag {tag} data quality: {{quality}}{{held}}",
                    self.causes(tag),
                ),
                path,
            )

    def alarm(self, i: int, a: AlarmConfig) -> AlarmDef | None:
        path = f"alarms[{i}]"
        try:
            quantity, sig_ref = signal_quantity(self.config, a.signal)
        except (LookupError, UnitError) as exc:
            self.problem(f"{path}.signal", str(exc.args[0]))
            return None
        conditions = [
            k
            for k in ("high_high", "high", "low", "low_low", "deviation", "rate")
            if getattr(a, k) is not None
        ]
        if len(conditions) != 1:
            got = ", ".join(conditions) or "none"
            self.problem(
                path,
                f"give exactly one of high_high, high, low, low_low, deviation, rate (got {got})",
            )
            return None
        kind = conditions[0]
        try:
            fields = self._condition(a, kind, quantity, sig_ref, path)
            deadband = 0.0  # SI difference; per minute for a rate alarm, like its limit
            if a.deadband is not None:
                deadband = self._parse(
                    parse_difference, a.deadband, quantity, f"{path}.deadband"
                ).value
            suppress = self._suppress(a.suppress_when, f"{path}.suppress_when")
        except _Problem as exc:
            self.problem(exc.path, exc.message)
            return None
        if a.priority not in PRIORITIES:
            self.problem(f"{path}.priority", f"expected one of {', '.join(PRIORITIES)}")
            return None
        return AlarmDef(
            name=a.name,
            signal=a.signal,
            kind=kind,
            priority=a.priority,
            deadband=deadband,
            on_delay=a.on_delay,
            off_delay=a.off_delay,
            latch=a.latch,
            realarm=a.realarm,
            suppress=suppress,
            message=a.message,
            quantity=quantity,
            signal_reference=sig_ref,
            shelvable=a.shelvable,
            **fields,
        )

    def _condition(
        self, a: AlarmConfig, kind: str, quantity: str, sig_ref: str | None, path: str
    ) -> dict[str, object]:
        if kind == "deviation":
            assert a.deviation is not None
            try:
                other_q, other_ref = signal_quantity(self.config, a.deviation.signal)
            except (LookupError, UnitError) as exc:
                raise _Problem(f"{path}.deviation.signal", str(exc.args[0])) from exc
            if comparable(other_q) != comparable(quantity):
                raise _Problem(
                    f"{path}.deviation.signal",
                    f"cannot compare {a.signal} ({quantity}) with {a.deviation.signal} ({other_q})",
                )
            q = self._parse(parse_difference, a.deviation.limit, quantity, f"{path}.deviation")
            return {
                "limit": q.value,
                "other": a.deviation.signal,
                "other_reference": other_ref,
                **unit_fields(q, None),
            }
        if kind == "rate":
            assert a.rate is not None
            q = self._parse(parse_difference, a.rate.limit, quantity, f"{path}.rate.limit")
            fields = unit_fields(q, None)
            fields["unit_label"] = f"{fields['unit_label']}/min"
            return {"limit": q.value, "direction": a.rate.direction, **fields}
        text = getattr(a, kind)
        q = self._parse(parse_level, text, quantity, f"{path}.{kind}")
        ref = q.reference if quantity == "pressure" else None
        return {"limit": q.value, "reference": ref, **unit_fields(q, ref)}

    @staticmethod
    def _parse(fn: object, text: str, quantity: str, path: str) -> units.Quantity:
        try:
            return fn(text, quantity)  # type: ignore[operator,no-any-return]
        except UnitError as exc:
            raise _Problem(path, str(exc)) from exc

    def _suppress(self, text: str | None, path: str) -> Suppress | None:
        if not text:
            return None
        try:
            signal, op, limit_text = parse_suppress(text)
        except ValueError as exc:
            raise _Problem(path, str(exc)) from exc
        try:
            quantity, sig_ref = signal_quantity(self.config, signal)
            q = parse_level(limit_text, quantity)
        except (LookupError, UnitError) as exc:
            raise _Problem(path, str(exc.args[0])) from exc
        ref = q.reference if quantity == "pressure" else None
        return Suppress(signal, op, q.value, quantity, ref, sig_ref)


class _Problem(Exception):
    def __init__(self, path: str, message: str) -> None:
        super().__init__(message)
        self.path = path
        self.message = message


def compile_alarms(config: Config) -> dict[str, AlarmDef]:
    """Every alarm of a configuration: the configured ones and the built-ins, by name.
    Raises ConfigError listing every alarm that cannot be compiled, each with its path."""
    c = _Compiler(config)
    c.builtins()
    used: dict[str, str] = {}
    for i, a in enumerate(config.alarms):
        d = c.alarm(i, a)
        if d is None:
            continue
        c.add(d, f"alarms[{i}]")
        for sig in (d.signal, d.other):
            if sig is not None and sig in _index(config)[0]:
                used.setdefault(sig, f"alarms[{i}]")
    c.tag_quality(used)
    defs = _philosophy(config, c)
    if c.problems:
        raise ConfigError(c.problems)
    return defs


def _philosophy(config: Config, c: _Compiler) -> dict[str, AlarmDef]:
    """Apply the alarm philosophy to every definition: who may be shelved, for how long."""
    rules = config.alarm_philosophy
    for i, name in enumerate(rules.not_shelvable):
        if name not in c.defs:
            c.problem(
                f"alarm_philosophy.not_shelvable[{i}]",
                f"no alarm is named {name!r}; known: {', '.join(sorted(c.defs))}",
            )
    if rules.max_shelve <= 0:
        c.problem("alarm_philosophy.max_shelve", "must be longer than 0 s")
    out: dict[str, AlarmDef] = {}
    for name, d in c.defs.items():
        why = ""
        if not d.shelvable:
            why = f"{name} is marked shelvable: false"
        elif name in rules.not_shelvable:
            why = f"{name} is listed in alarm_philosophy.not_shelvable"
        elif d.priority not in rules.shelvable_priorities:
            allowed = ", ".join(rules.shelvable_priorities) or "none"
            why = (
                f"the alarm philosophy lets operators shelve {allowed} alarms only, "
                f"not {d.priority} ones (alarm_philosophy.shelvable_priorities)"
            )
        out[name] = replace(
            d, shelvable=not why, not_shelvable_why=why, max_shelve=rules.max_shelve
        )
    return out
