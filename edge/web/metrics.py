"""Prometheus metrics: a custom collector that reads live state at scrape time.

The collector holds a callable returning a ``LiveView`` of the monitor (references, not
copies) and yields fresh metric families from it on every scrape, into a registry passed in
by the caller (never the global one). A value whose quality is bad is not yielded: its
series goes away and ``steamedge_point_quality`` says why.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

from prometheus_client import CollectorRegistry
from prometheus_client.core import Metric
from prometheus_client.registry import Collector

from edge.model import BarometerReading, Hint, PointState
from edge.sources.base import READ_BUCKETS, SourceHealth
from edge.units import ZERO_CELSIUS

__all__ = [
    "ALARM_NAMES",
    "HEALTH_NAMES",
    "PROPERTY_NAMES",
    "AlarmRow",
    "Family",
    "LiveView",
    "MonitorCollector",
    "build_registry",
    "families",
]

INFO_HELP = (
    "steam-edge build and site, always 1. ADVISORY ONLY: it reads and computes, never "
    "writes to a controller and never replaces certified safety controls."
)


@dataclass(frozen=True, slots=True)
class AlarmRow:
    """One alarm as the metrics see it."""

    name: str
    priority: str
    state: str  # ISA-18.2 state name
    active: bool
    unacknowledged: bool
    shelved: bool
    out_of_service: bool
    suppressed: bool = False
    latched: bool = False


@dataclass(frozen=True, slots=True)
class LiveView:
    """What the collector needs, gathered by the monitor at scrape time."""

    version: str
    site: str
    points: Mapping[str, PointState]
    barometer: BarometerReading | None
    alarms: Sequence[AlarmRow]
    sources: Mapping[str, SourceHealth]
    notifications_pending: Mapping[str, int] = field(default_factory=dict)
    notifications_sent: Mapping[str, int] = field(default_factory=dict)
    notifications_failed: Mapping[str, int] = field(default_factory=dict)
    publish: Mapping[str, Mapping[str, float]] = field(default_factory=dict)  # channel -> figures
    alarm_health: Mapping[str, float] = field(default_factory=dict)
    evaluations: int = 0
    evaluation_seconds: float = 0.0
    last_evaluation: float = 0.0
    reloads: Mapping[str, int] = field(default_factory=dict)  # result -> count
    storage_ok: bool = True
    started: float = 0.0
    guard: Mapping[tuple[str, str], int] = field(default_factory=dict)  # (component, kind)
    flows: Mapping[str, Any] = field(default_factory=dict)  # name -> edge.flow.FlowState
    totals: Mapping[str, Any] = field(default_factory=dict)  # name -> edge.flow.Totals


# point quantity -> (metric name, help, conversion from SI; None: as it is)
_POINT_METRICS: tuple[tuple[str, str, str, Callable[[float], float] | None], ...] = (
    (
        "pressure",
        "steamedge_pressure_absolute_pascals",
        "Absolute pressure used for the steam tables (gauge + barometric).",
        None,
    ),
    (
        "temperature",
        "steamedge_temperature_celsius",
        "Measured temperature.",
        lambda k: k - ZERO_CELSIUS,
    ),
    (
        "tsat",
        "steamedge_saturation_temperature_celsius",
        "IAPWS-IF97 saturation temperature at the absolute pressure.",
        lambda k: k - ZERO_CELSIUS,
    ),
    (
        "superheat",
        "steamedge_superheat_kelvin",
        "Temperature minus saturation temperature (negative: subcooled).",
        None,
    ),
    (
        "deviation",
        "steamedge_saturation_deviation_kelvin",
        "|T - Tsat| on a point expected to be saturated.",
        None,
    ),
    (
        "enthalpy",
        "steamedge_enthalpy_joules_per_kilogram",
        "IAPWS-IF97 specific enthalpy at the measured pressure and temperature.",
        None,
    ),
    (
        "density",
        "steamedge_density_kilograms_per_cubic_meter",
        "IAPWS-IF97 density at the measured pressure and temperature.",
        None,
    ),
)

# alarm-system health figures (ISA-18.2 performance measures) -> (metric, help)
_HEALTH_METRICS = {
    "raised_10m": ("steamedge_alarms_raised_10m", "Alarms raised in the last 10 minutes."),
    "raised_1h": ("steamedge_alarms_raised_1h", "Alarms raised in the last hour."),
    "flood": ("steamedge_alarm_flood", "1 while more than 10 alarms were raised in 10 minutes."),
    "chattering": (
        "steamedge_alarms_chattering",
        "Alarms raised 3 or more times within 60 s during the last hour.",
    ),
    "stale": ("steamedge_alarms_stale", "Alarms standing for more than 24 hours."),
    "standing": ("steamedge_alarms_standing", "Alarms active now."),
    "shelved": ("steamedge_alarms_shelved", "Alarms shelved now."),
    "suppressed": (
        "steamedge_alarms_suppressed",
        "Alarms suppressed by design now (consequences a standing cause explains).",
    ),
    "causes": (
        "steamedge_alarm_causes",
        "Cause alarms standing now (a source link down, the barometer fallback in use).",
    ),
}


def _usable(value: float | None, level: int) -> bool:
    return value is not None and level > 0 and math.isfinite(value)


class Family:
    """One metric family as plain data: ``samples`` are (suffix, label values, value)."""

    __slots__ = ("help", "kept", "kind", "labels", "name", "samples")

    def __init__(self, name: str, kind: str, help_text: str, labels: tuple[str, ...] = ()):
        self.name = name  # counters without "_total"; the renderers add it
        self.kind = kind  # gauge | counter | histogram
        self.help = help_text
        self.labels = labels
        self.samples: list[tuple[str, tuple[str, ...], float]] = []
        # handed out again, samples and all, while its input stays the same (the alarm
        # families): nobody changes a family once made, so a renderer may keep its text
        self.kept = False

    def add(self, values: tuple[str, ...], value: float, suffix: str = "") -> None:
        self.samples.append((suffix, values, value))


def families(v: LiveView, wanted: set[str] | None = None) -> list[Family]:
    """Every steamedge_ family from one live view (bad values left out); only those named
    in ``wanted`` (sample names as scraped, counters with ``_total``) when it is given."""
    out: list[Family] = [*_info(v), *_points(v, wanted), *_barometer(v)]
    if wanted is None or wanted & ALARM_NAMES:
        out += _alarms(v)
    for part in (_alarm_health, _sources, _notifications, _publish, _service, _flows):
        out += part(v)
    if wanted is None:
        return out
    return [f for f in out if (f.name + ("_total" if f.kind == "counter" else "")) in wanted]


HEALTH_NAMES = frozenset(name for name, _ in _HEALTH_METRICS.values())
PROPERTY_NAMES = frozenset(
    name for q, name, _, _ in _POINT_METRICS if q in ("enthalpy", "entropy", "density")
)


def _gauge(name: str, help_text: str, *labels: str) -> Family:
    return Family(name, "gauge", help_text, labels)


def _counter(name: str, help_text: str, *labels: str) -> Family:
    return Family(name, "counter", help_text, labels)


def _single(name: str, kind: str, help_text: str, value: float) -> Family:
    fam = Family(name, kind, help_text)
    fam.add((), value)
    return fam


def _info(v: LiveView) -> list[Family]:
    info = _gauge("steamedge_info", INFO_HELP, "version", "site", "mode")
    info.add((v.version, v.site, "advisory"), 1)
    return [info]


def _points(v: LiveView, wanted: set[str] | None = None) -> list[Family]:
    quality = _gauge(
        "steamedge_point_quality",
        "Quality of the point's figures: 2 good, 1 uncertain, 0 bad.",
        "point",
    )
    reason = _gauge(
        "steamedge_point_quality_reason",
        "1 for the reason a point is not good (comm_loss, stale, out_of_range, ...).",
        "point",
        "reason",
    )
    hint = _gauge(
        "steamedge_point_hint",
        "1 while derive suspects a configuration mistake at this point "
        "(e.g. gauge read as absolute); the label names the fix, the API the full text.",
        "point",
        "fix",
    )
    quantities = [
        (q, _gauge(name, text, "point"), conv)
        for q, name, text, conv in _POINT_METRICS
        if wanted is None or name in wanted
    ]
    # one pass over the points; samples appended directly (this runs for 5,000 points)
    status = wanted is None or bool(wanted & _STATUS_NAMES)
    q_add, r_add, h_add = quality.samples.append, reason.samples.append, hint.samples.append
    columns = [(q, fam.samples.append, conv) for q, fam, conv in quantities]
    for name, p in v.points.items():
        key = (name,)
        if status:
            pq = p.quality
            level = int(pq.level)
            q_add(("", key, level))
            if level < 2 and pq.reason:
                r_add(("", (name, pq.reason), 1))
            if p.hint:
                label = _hint_label(p.hint)
                if label is not None:
                    h_add(("", (name, label), 1))
        readings = p.readings
        for q, add, conv in columns:
            r = readings.get(q)
            if r is None:
                continue
            value = r.value
            # usable: a finite number of a quality better than bad (value - value: NaN/inf)
            if value is not None and r.quality.level > 0 and value - value == 0.0:
                add(("", key, value if conv is None else conv(value)))
    return [quality, reason, hint, *(fam for _, fam, _ in quantities)]


_STATUS_NAMES = frozenset(
    {"steamedge_point_quality", "steamedge_point_quality_reason", "steamedge_point_hint"}
)


def _barometer(v: LiveView) -> list[Family]:
    baro = _gauge(
        "steamedge_barometric_pressure_pascals",
        "Barometric pressure in use and where it comes from (fixed, altitude, tag).",
        "origin",
    )
    quality = _gauge(
        "steamedge_barometer_quality",
        "Quality of the barometric value in use: 2 good, 1 uncertain, 0 bad.",
        "origin",
    )
    b = v.barometer
    if b is not None:
        quality.add((b.origin,), int(b.quality.level))
        if _usable(b.value, int(b.quality.level)):
            baro.add((b.origin,), b.value)
    return [baro, quality]


# The alarm families of the last scrape and the rows they were made from: 5,500 alarms at
# 10,000 tags make 33,000 samples whose flags rarely change, so while the rows compare equal
# (identity first: the monitor hands over the same row objects while an alarm stands still)
# the same families are handed out again, and the renderer reuses their text.
_last_alarms: tuple[tuple[AlarmRow, ...], list[Family]] = ((), [])


def _alarms(v: LiveView) -> list[Family]:
    global _last_alarms
    rows = tuple(v.alarms)
    last_rows, last = _last_alarms
    if rows == last_rows and last:
        return last
    out = _alarm_families(rows)
    for fam in out:
        fam.kept = True
    _last_alarms = (rows, out)
    return out


def _alarm_families(rows: Sequence[AlarmRow]) -> list[Family]:
    labels = ("alarm", "priority")
    active = _gauge("steamedge_alarm_active", "1 while the alarm condition stands.", *labels)
    unack = _gauge(
        "steamedge_alarm_unacknowledged", "1 while the alarm waits for acknowledgement.", *labels
    )
    shelved = _gauge(
        "steamedge_alarm_shelved", "1 while an operator has shelved the alarm.", *labels
    )
    oos = _gauge("steamedge_alarm_out_of_service", "1 while the alarm is out of service.", *labels)
    state = _gauge(
        "steamedge_alarm_state", "1 for the alarm's current ISA-18.2 state.", *labels, "state"
    )
    latched = _gauge(
        "steamedge_alarm_latched",
        "1 while a latching alarm's condition has returned and it waits for a reset (ack).",
        *labels,
    )
    adds = (
        active.samples.append,
        unack.samples.append,
        shelved.samples.append,
        oos.samples.append,
        state.samples.append,
        latched.samples.append,
    )
    a_add, u_add, sh_add, o_add, st_add, l_add = adds
    for a in rows:  # 5,500 alarms at 10,000 tags: samples appended directly
        key = (a.name, a.priority)
        a_add(("", key, int(a.active)))
        u_add(("", key, int(a.unacknowledged)))
        sh_add(("", key, int(a.shelved)))
        o_add(("", key, int(a.out_of_service)))
        st_add(("", (a.name, a.priority, a.state), 1))
        l_add(("", key, int(a.latched)))
    return [active, unack, shelved, oos, state, latched]


ALARM_NAMES = frozenset(
    {
        "steamedge_alarm_active",
        "steamedge_alarm_unacknowledged",
        "steamedge_alarm_shelved",
        "steamedge_alarm_out_of_service",
        "steamedge_alarm_state",
        "steamedge_alarm_latched",
    }
)


def _alarm_health(v: LiveView) -> list[Family]:
    out = []
    for key, (name, text) in _HEALTH_METRICS.items():
        if key in v.alarm_health:
            out.append(_single(name, "gauge", text, float(v.alarm_health[key])))
    return out


def _sources(v: LiveView) -> list[Family]:
    up = _gauge("steamedge_source_up", "1 while the last read of the source succeeded.", "source")
    reads = Family(
        "steamedge_source_read_seconds", "histogram", "Duration of one read cycle.", ("source",)
    )
    errors = _counter("steamedge_source_errors", "Source errors by kind.", "source", "kind")
    last = _gauge(
        "steamedge_source_last_read_timestamp_seconds",
        "When the source was last read (Unix time).",
        "source",
    )
    for name, h in v.sources.items():
        up.add((name,), int(h.up))
        cumulative = 0
        for bound, count in zip(_BOUNDS, h.bucket_counts, strict=False):
            cumulative += count
            reads.add((name, bound), cumulative, "_bucket")
        reads.add((name, "+Inf"), h.reads, "_bucket")
        reads.add((name,), h.reads, "_count")
        reads.add((name,), h.read_sum, "_sum")
        for kind, count in sorted(h.errors.items()):
            errors.add((name, kind), count)
        if h.last_read_time:
            last.add((name,), h.last_read_time)
    return [up, reads, errors, last]


def _notifications(v: LiveView) -> list[Family]:
    pending = _gauge("steamedge_notifications_pending", "Queued, not yet delivered.", "channel")
    sent = _counter(
        "steamedge_notifications_delivered", "Notifications delivered since start.", "channel"
    )
    failed = _counter(
        "steamedge_notification_failures",
        "Failed delivery attempts since start (the outbox keeps the message).",
        "channel",
    )
    for fam, counts in (
        (pending, v.notifications_pending),
        (sent, v.notifications_sent),
        (failed, v.notifications_failed),
    ):
        for name, n in sorted(counts.items()):
            fam.add((name,), n)
    return [pending, sent, failed]


def _publish(v: LiveView) -> list[Family]:
    """Per MQTT publishing channel: connected, queued, published, dropped (by kind)."""
    connected = _gauge(
        "steamedge_publish_connected", "1 while the channel is connected to its broker.", "channel"
    )
    queued = _gauge(
        "steamedge_publish_queued", "Records waiting in the store-and-forward queue.", "channel"
    )
    published = _counter(
        "steamedge_publish_messages", "MQTT messages the broker has, since start.", "channel"
    )
    dropped = _counter(
        "steamedge_publish_dropped",
        "Records dropped from a full queue since start (kind value: thinned point and source "
        "records; kind alarm: alarm events, only when the queue held nothing else).",
        "channel",
        "kind",
    )
    for name, f in sorted(v.publish.items()):
        connected.add((name,), f.get("connected", 0.0))
        queued.add((name,), f.get("queued", 0.0))
        published.add((name,), f.get("published", 0.0))
        dropped.add((name, "value"), f.get("dropped", 0.0))
        dropped.add((name, "alarm"), f.get("dropped_alarms", 0.0))
    return [connected, queued, published, dropped]


def _service(v: LiveView) -> list[Family]:
    out = [
        _single(
            "steamedge_evaluations", "counter", "Evaluation passes since start.", v.evaluations
        ),
        _single(
            "steamedge_evaluation_seconds",
            "counter",
            "Time spent in evaluation passes since start.",
            v.evaluation_seconds,
        ),
    ]
    if v.last_evaluation:
        out.append(
            _single(
                "steamedge_last_evaluation_timestamp_seconds",
                "gauge",
                "When the last evaluation pass ran (Unix time).",
                v.last_evaluation,
            )
        )
    reloads = _counter("steamedge_config_reloads", "Configuration reloads by result.", "result")
    for result in ("ok", "rejected"):
        reloads.add((result,), v.reloads.get(result, 0))
    out.append(reloads)
    out.append(
        _single(
            "steamedge_storage_ok",
            "gauge",
            "1 while the journal file can be written.",
            v.storage_ok,
        )
    )
    guard = _counter(
        "steamedge_guard_events",
        "Faulty or hostile input handled without harm, by component and kind (journal rows "
        "quarantined, outbox rows dropped at the bound, HTTP connections closed, library log "
        "lines folded).",
        "component",
        "kind",
    )
    for (component, kind), n in sorted(v.guard.items()):
        guard.add((component, kind), n)
    out.append(guard)
    if v.started:
        out.append(
            _single("steamedge_start_time_seconds", "gauge", "When the monitor started.", v.started)
        )
    return out


def _flows(v: LiveView) -> list[Family]:
    """Flow rates (left out while bad), quality, and the totals as counters."""
    if not v.flows and not v.totals:
        return []
    mass = _gauge("steamedge_flow_mass_kilograms_per_second", "Mass flow.", "flow")
    power = _gauge("steamedge_flow_energy_watts", "Energy rate m (h - h_ref).", "flow")
    eff = _gauge(
        "steamedge_flow_boiler_efficiency_ratio",
        "Boiler efficiency by the direct method (heating value basis as configured).",
        "flow",
    )
    quality = _gauge("steamedge_flow_quality", "2 good, 1 uncertain, 0 bad.", "flow")
    for name, f in sorted(v.flows.items()):
        level = int(f.quality.level)
        quality.add((name,), level)
        if _usable(f.mass_flow, level):
            mass.add((name,), f.mass_flow)
        if _usable(f.energy_rate, level):
            power.add((name,), f.energy_rate)
        eq = f.efficiency_quality
        if eq is not None and _usable(f.efficiency, int(eq.level)):
            eff.add((name,), f.efficiency)
    kg = _counter("steamedge_flow_mass_kilograms", "Mass counted since the last reset.", "flow")
    joules = _counter(
        "steamedge_flow_energy_joules", "Energy counted since the last reset.", "flow"
    )
    unmeasured = _counter(
        "steamedge_flow_not_measured_seconds",
        "Time not counted in the totals (flow bad, monitor down).",
        "flow",
    )
    energy_missed = _counter(
        "steamedge_flow_energy_not_measured_seconds",
        "Time the energy total missed (flow bad, reference enthalpy bad, monitor down).",
        "flow",
    )
    unsure = _counter(
        "steamedge_flow_uncertain_seconds",
        "Time counted on uncertain figures (outside the standard's limits).",
        "flow",
    )
    for name, t in sorted(v.totals.items()):
        kg.add((name,), t.mass)
        joules.add((name,), t.energy)
        unmeasured.add((name,), t.not_measured)
        energy_missed.add((name,), t.energy_not_measured)
        unsure.add((name,), t.uncertain)
    return [mass, power, eff, quality, kg, joules, unmeasured, energy_missed, unsure]


class MonitorCollector(Collector):
    """Yields every steamedge_ metric from a fresh ``LiveView`` on each scrape."""

    def __init__(self, view: Callable[[], LiveView]) -> None:
        self._view = view

    def describe(self) -> list[Metric]:
        return []  # unchecked collector: names come from collect()

    def collect(self) -> Iterator[Metric]:
        for fam in families(self._view()):
            metric = Metric(fam.name, fam.help, fam.kind)
            total = "_total" if fam.kind == "counter" else ""
            for suffix, values, value in fam.samples:
                names = fam.labels if suffix != "_bucket" else (*fam.labels, "le")
                metric.add_sample(
                    fam.name + suffix + total, dict(zip(names, values, strict=True)), value
                )
            yield metric


def _bound(b: float) -> str:
    return repr(float(b))


_BOUNDS = [_bound(b) for b in READ_BUCKETS]


def _hint_label(hint: object) -> str | None:
    """A bounded label for a hint that proposes a configuration change: the change as the
    tag writes it ("reference: gauge", "unit: psig"; "unit: kPa | unit: kg/cm2" when the
    hint says "either ... or"), whose set of values is small; the API gives the sentence.
    A hint that proposes no change (undecided, unexplained) is not exported."""
    if isinstance(hint, Hint):
        if hint.fix is None:
            return None
        label = " | ".join(f.setting for f in hint.fixes)
        return label if len(label) <= 60 else hint.fix.setting
    if isinstance(hint, str) and hint:  # a plain sentence (older callers)
        _, sep, fix = hint.rpartition(": set ")
        fix = fix.strip().rstrip(".")
        return fix if sep and 0 < len(fix) <= 60 else "check_configuration"
    return None


def build_registry(view: Callable[[], LiveView], registry: CollectorRegistry | None = None) -> Any:
    """A registry (fresh unless given) with the monitor's collector registered in it."""
    registry = registry if registry is not None else CollectorRegistry(auto_describe=False)
    registry.register(MonitorCollector(view))
    return registry
