"""The live state of one running configuration, without I/O.

``compile_plan(config)`` compiles everything a config describes (barometer, points, alarms,
staleness limits) and collects every problem into one ``ConfigError``, so a reload is all or
nothing. ``Runtime`` holds the TagStore, the last figures and the alarm states, and
``evaluate(now)`` runs one pass: snapshot -> barometer -> derive -> alarm signals -> step.
The service (``edge.service``) owns the clock, the sources and the storage around it.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from typing import Any

from edge import barometer as baro_mod
from edge import derive
from edge import flow as flow_mod
from edge.alarms import engine
from edge.alarms.definitions import AlarmDef
from edge.alarms.signals import point_tags, signals_from, source_tags
from edge.alarms.state import Action, AlarmState
from edge.barometer import BarometerSpec
from edge.config import Config
from edge.derive.spec import PointSpec
from edge.errors import ConfigError, ConfigProblem, EdgeError
from edge.model import AlarmEvent, BarometerReading, PointState, Sample
from edge.store import TagStore

__all__ = ["Compiled", "Runtime", "compile_plan", "stale_limits"]

START_HOLD = 30.0  # s at most that alarms wait after start for every tag's first sample
STALE_INTERVALS = 3.0  # a tag with no stale_after goes stale after this many source intervals


def stale_limits(config: Config) -> dict[str, float]:
    """Seconds after which each tag's last sample is stale."""
    out: dict[str, float] = {}
    for source in config.sources:
        default = max(STALE_INTERVALS * source.interval, source.interval + source.timeout)
        for tag in source.tags:
            out[tag.name] = tag.stale_after if tag.stale_after is not None else default
    return out


@dataclass(frozen=True, slots=True)
class Compiled:
    """A config and everything compiled from it."""

    config: Config
    barometer: BarometerSpec
    points: list[PointSpec]
    alarms: Mapping[str, AlarmDef]
    stale_after: Mapping[str, float]
    source_tags: Mapping[str, tuple[str, ...]]
    point_tags: Mapping[str, tuple[str, ...]]
    needs_properties: bool = False  # an alarm reads enthalpy, entropy or density
    flows: Mapping[str, flow_mod.FlowSpec] = field(default_factory=dict)


def compile_plan(config: Config) -> Compiled:
    """Compile every part of ``config``; every problem found lands in one ConfigError."""
    problems: list[ConfigProblem] = []
    parts: dict[str, Any] = {}
    steps = (
        ("barometer", lambda: baro_mod.compile_barometer(config.barometer)),
        ("points", lambda: derive.compile_points(config)),
        ("alarms", lambda: engine.compile_alarms(config)),
        ("flows", lambda: flow_mod.compile_flows(config)),
    )
    for name, step in steps:
        try:
            parts[name] = step()
        except ConfigError as exc:
            problems.extend(exc.problems)
        except (EdgeError, ValueError) as exc:
            problems.append(ConfigProblem(path=name, message=str(exc)))
    if problems:
        raise ConfigError(problems)
    return Compiled(
        config=config,
        barometer=parts["barometer"],
        points=parts["points"],
        alarms=parts["alarms"],
        stale_after=stale_limits(config),
        source_tags=source_tags(config),
        point_tags=point_tags(config),
        needs_properties=_alarms_read_properties(config),
        flows=parts["flows"],
    )


_PROPERTIES = (".enthalpy", ".entropy", ".density")


def _alarms_read_properties(config: Config) -> bool:
    texts: list[str] = []
    for a in config.alarms:
        texts += [a.signal, a.suppress_when or "", a.deviation.signal if a.deviation else ""]
    return any(p in t for t in texts for p in _PROPERTIES)


class Runtime:
    """Tags, figures and alarm states of the running plan; ``evaluate`` is one pass."""

    def __init__(
        self,
        plan: Compiled,
        states: Mapping[str, AlarmState] | None = None,
        totals: Mapping[str, flow_mod.Totals] | None = None,
    ) -> None:
        self.plan = plan
        self.store = TagStore(plan.stale_after)
        self.light: dict[str, PointState] = {}  # this pass, properties only if alarms need them
        self._full: dict[str, PointState] | None = None  # with properties, made when asked
        self.barometer: BarometerReading | None = None
        self.snapshot: dict[str, Sample] = {}
        self.evidence: derive.Window = derive.EMPTY_WINDOW  # hint evidence, by point
        # delays restart after a restart: nobody watched the signal while the monitor was down
        loaded = {
            n: replace(s, pending_since=None, clearing_since=None)
            for n, s in (states or {}).items()
        }
        self.states: dict[str, AlarmState] = dict(engine.carry_over(loaded, plan.alarms))
        self.flows: dict[str, flow_mod.FlowState] = {}  # of the last pass
        self.totals: dict[str, flow_mod.Totals] = dict(totals or {})
        # alarms are not judged until every tag has a first sample (or START_HOLD passed):
        # a saved state judged on no data (a shelve that expired while the monitor was
        # down) would announce an alarm the first real reading clears
        self.judging = False
        self._first_pass: float | None = None
        self._rest = engine.Rest()  # the resting point quality alarms (engine.step)

    def ingest(self, samples: list[Sample]) -> None:
        self.store.update(samples)

    def evaluate(self, now: float) -> list[AlarmEvent]:
        """One pass over the latest samples; returns the alarm events it produced."""
        plan = self.plan
        snapshot = self.store.snapshot(now)
        reading = baro_mod.resolve(plan.barometer, snapshot, now)
        points, self.evidence = derive.step(
            plan.points, snapshot, reading, self.evidence, properties=plan.needs_properties
        )
        signals = signals_from(
            points,
            snapshot,
            barometer=reading,
            sources=plan.source_tags,
            tags_of=plan.point_tags,
        )
        if self.judging or self._data_arrived(snapshot, now):
            states, events = engine.step(plan.alarms, self.states, signals, now, self._rest)
        else:
            states, events = self.states, []
        if plan.flows:
            self.flows = flow_mod.evaluate(plan.flows, points, snapshot)
            self.totals = flow_mod.step_totals(plan.flows, self.totals, self.flows, now)
        # both dicts are made afresh by this pass (derive, engine): kept as they are
        self.snapshot, self.barometer, self.light = snapshot, reading, points
        self._full = self.light if plan.needs_properties else None
        self.states = states
        return list(events)

    def _data_arrived(self, snapshot: Mapping[str, Sample], now: float) -> bool:
        if self._first_pass is None:
            self._first_pass = now
        tags = self.plan.stale_after
        if all(t in snapshot for t in tags) or not 0 <= now - self._first_pass < START_HOLD:
            self.judging = True
        return self.judging

    @property
    def points(self) -> dict[str, PointState]:
        """Every point of the last pass with enthalpy, entropy and density, computed from
        that pass's snapshot the first time someone asks (the API, a full scrape)."""
        if self._full is None:
            if self.barometer is None:
                return self.light
            # the light pass's points with their properties added: same snapshot and
            # barometer, so the rest and the hints judged on the light pass stand
            full = derive.add_properties(
                self.plan.points, self.light, self.snapshot, self.barometer
            )
            names = _point_names(self.plan)
            self._full = {k: v for k, v in full.items() if k in names}
        return self._full

    def act(self, action: Action, now: float) -> list[AlarmEvent]:
        """Apply an operator action (ack, shelve, ...); raises UnknownAlarm/OperatorError."""
        states, events = engine.act(self.plan.alarms, self.states, action, now)
        self.states = dict(states)
        self._rest.clear()  # states changed outside step
        return list(events)

    def swap(self, plan: Compiled, now: float) -> list[AlarmEvent]:
        """Run ``plan`` from now on: alarms with the same name keep their state, tags no
        longer configured are forgotten. Returns ``cleared`` events for standing alarms the
        new plan no longer has."""
        retired = engine.retire(self.states, plan.alarms, now)
        self.states = dict(engine.carry_over(self.states, plan.alarms))
        self._rest.clear()
        self.store.set_stale_after(plan.stale_after)
        self.store.forget(plan.stale_after.keys())
        self.plan = plan
        self.evidence = derive.EMPTY_WINDOW  # evidence was judged against the old specs
        names = _point_names(plan)
        self.light = {k: v for k, v in self.light.items() if k in names}
        self._full = None
        self.flows = {k: v for k, v in self.flows.items() if k in plan.flows}
        self.totals = {k: v for k, v in self.totals.items() if k in plan.flows}
        return retired

    def reset_totals(self, flow: str, now: float) -> flow_mod.Totals:
        """Zero one flow's totals at ``now``; returns the totals before the reset. Raises
        KeyError for a flow that is not configured."""
        if flow not in self.plan.flows:
            raise KeyError(flow)
        before = self.totals.get(flow) or flow_mod.Totals()
        self.totals[flow] = flow_mod.reset(before, now)
        return before


def _point_names(plan: Compiled) -> set[str]:
    return {p.name for p in plan.config.points}
