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
from prometheus_client.core import (
    CounterMetricFamily,
    GaugeMetricFamily,
    HistogramMetricFamily,
    Metric,
)
from prometheus_client.registry import Collector

from edge.model import BarometerReading, PointState
from edge.sources.base import READ_BUCKETS, SourceHealth
from edge.units import ZERO_CELSIUS

__all__ = ["AlarmRow", "LiveView", "MonitorCollector", "build_registry"]

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
    alarm_health: Mapping[str, float] = field(default_factory=dict)
    evaluations: int = 0
    evaluation_seconds: float = 0.0
    last_evaluation: float = 0.0
    reloads: Mapping[str, int] = field(default_factory=dict)  # result -> count
    storage_ok: bool = True
    started: float = 0.0


# point quantity -> (metric name, help, conversion from SI)
_POINT_METRICS: tuple[tuple[str, str, str, Callable[[float], float]], ...] = (
    (
        "pressure",
        "steamedge_pressure_absolute_pascals",
        "Absolute pressure used for the steam tables (gauge + barometric).",
        float,
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
        float,
    ),
    (
        "deviation",
        "steamedge_saturation_deviation_kelvin",
        "|T - Tsat| on a point expected to be saturated.",
        float,
    ),
    (
        "enthalpy",
        "steamedge_enthalpy_joules_per_kilogram",
        "IAPWS-IF97 specific enthalpy at the measured pressure and temperature.",
        float,
    ),
    (
        "density",
        "steamedge_density_kilograms_per_cubic_meter",
        "IAPWS-IF97 density at the measured pressure and temperature.",
        float,
    ),
)

# alarm-system health figures (ISA-18.2 performance measures) -> (metric, help)
_HEALTH_METRICS = {
    "raised_10m": ("steamedge_alarms_raised_10m", "Alarms raised in the last 10 minutes."),
    "raised_1h": ("steamedge_alarms_raised_1h", "Alarms raised in the last hour."),
    "flood": ("steamedge_alarm_flood", "1 while more than 10 alarms were raised in 10 minutes."),
    "chattering": (
        "steamedge_alarms_chattering",
        "Alarms raised 3 or more times in the last minute.",
    ),
    "stale": ("steamedge_alarms_stale", "Alarms standing for more than 24 hours."),
    "standing": ("steamedge_alarms_standing", "Alarms active now."),
    "shelved": ("steamedge_alarms_shelved", "Alarms shelved now."),
}


def _usable(value: float | None, level: int) -> bool:
    return value is not None and level > 0 and math.isfinite(value)


class MonitorCollector(Collector):
    """Yields every steamedge_ metric from a fresh ``LiveView`` on each scrape."""

    def __init__(self, view: Callable[[], LiveView]) -> None:
        self._view = view

    def describe(self) -> list[Metric]:
        return []  # unchecked collector: names come from collect()

    def collect(self) -> Iterator[Metric]:
        v = self._view()
        yield from self._info(v)
        yield from self._points(v)
        yield from self._barometer(v)
        yield from self._alarms(v)
        yield from self._sources(v)
        yield from self._notifications(v)
        yield from self._service(v)

    def _info(self, v: LiveView) -> Iterator[Metric]:
        info = GaugeMetricFamily("steamedge_info", INFO_HELP, labels=["version", "site", "mode"])
        info.add_metric([v.version, v.site, "advisory"], 1)
        yield info

    def _points(self, v: LiveView) -> Iterator[Metric]:
        quality = GaugeMetricFamily(
            "steamedge_point_quality",
            "Quality of the point's figures: 2 good, 1 uncertain, 0 bad.",
            labels=["point"],
        )
        reason = GaugeMetricFamily(
            "steamedge_point_quality_reason",
            "1 for the reason a point is not good (comm_loss, stale, out_of_range, ...).",
            labels=["point", "reason"],
        )
        hint = GaugeMetricFamily(
            "steamedge_point_hint",
            "1 while derive suspects a configuration mistake at this point "
            "(e.g. gauge read as absolute); the API gives the full text.",
            labels=["point", "fix"],
        )
        families = [
            (q, GaugeMetricFamily(name, text, labels=["point"]), conv)
            for q, name, text, conv in _POINT_METRICS
        ]
        for name, p in v.points.items():
            quality.add_metric([name], int(p.quality.level))
            if p.quality.level < 2 and p.quality.reason:
                reason.add_metric([name, p.quality.reason], 1)
            if p.hint:
                hint.add_metric([name, _hint_code(p.hint)], 1)
            readings = p.readings
            for q, fam, conv in families:
                r = readings.get(q)
                if r is not None and _usable(r.value, int(r.quality.level)):
                    fam.add_metric([name], conv(r.value))  # type: ignore[arg-type]
        yield quality
        yield reason
        yield hint
        for _, fam, _ in families:
            yield fam

    def _barometer(self, v: LiveView) -> Iterator[Metric]:
        baro = GaugeMetricFamily(
            "steamedge_barometric_pressure_pascals",
            "Barometric pressure in use and where it comes from (fixed, altitude, tag).",
            labels=["origin"],
        )
        quality = GaugeMetricFamily(
            "steamedge_barometer_quality",
            "Quality of the barometric value in use: 2 good, 1 uncertain, 0 bad.",
            labels=["origin"],
        )
        b = v.barometer
        if b is not None:
            quality.add_metric([b.origin], int(b.quality.level))
            if _usable(b.value, int(b.quality.level)):
                baro.add_metric([b.origin], b.value)
        yield baro
        yield quality

    def _alarms(self, v: LiveView) -> Iterator[Metric]:
        labels = ["alarm", "priority"]
        active = GaugeMetricFamily(
            "steamedge_alarm_active", "1 while the alarm condition stands.", labels=labels
        )
        unack = GaugeMetricFamily(
            "steamedge_alarm_unacknowledged",
            "1 while the alarm waits for acknowledgement.",
            labels=labels,
        )
        shelved = GaugeMetricFamily(
            "steamedge_alarm_shelved", "1 while an operator has shelved the alarm.", labels=labels
        )
        oos = GaugeMetricFamily(
            "steamedge_alarm_out_of_service",
            "1 while the alarm is out of service.",
            labels=labels,
        )
        state = GaugeMetricFamily(
            "steamedge_alarm_state",
            "1 for the alarm's current ISA-18.2 state.",
            labels=[*labels, "state"],
        )
        for a in v.alarms:
            key = [a.name, a.priority]
            active.add_metric(key, int(a.active))
            unack.add_metric(key, int(a.unacknowledged))
            shelved.add_metric(key, int(a.shelved))
            oos.add_metric(key, int(a.out_of_service))
            state.add_metric([*key, a.state], 1)
        yield from (active, unack, shelved, oos, state)
        for key, (name, text) in _HEALTH_METRICS.items():
            if key in v.alarm_health:
                yield GaugeMetricFamily(name, text, value=float(v.alarm_health[key]))

    def _sources(self, v: LiveView) -> Iterator[Metric]:
        up = GaugeMetricFamily(
            "steamedge_source_up",
            "1 while the last read of the source succeeded.",
            labels=["source"],
        )
        reads = HistogramMetricFamily(
            "steamedge_source_read_seconds", "Duration of one read cycle.", labels=["source"]
        )
        errors = CounterMetricFamily(
            "steamedge_source_errors", "Source errors by kind.", labels=["source", "kind"]
        )
        last = GaugeMetricFamily(
            "steamedge_source_last_read_timestamp_seconds",
            "When the source was last read (Unix time).",
            labels=["source"],
        )
        bounds = [_bound(b) for b in READ_BUCKETS]
        for name, h in v.sources.items():
            up.add_metric([name], int(h.up))
            cumulative, buckets = 0, []
            for bound, count in zip(bounds, h.bucket_counts, strict=False):
                cumulative += count
                buckets.append((bound, cumulative))
            buckets.append(("+Inf", h.reads))
            reads.add_metric([name], buckets, h.read_sum)
            for kind, count in sorted(h.errors.items()):
                errors.add_metric([name, kind], count)
            if h.last_read_time:
                last.add_metric([name], h.last_read_time)
        yield from (up, reads, errors, last)

    def _notifications(self, v: LiveView) -> Iterator[Metric]:
        pending = GaugeMetricFamily(
            "steamedge_notifications_pending", "Queued, not yet delivered.", labels=["channel"]
        )
        for name, n in sorted(v.notifications_pending.items()):
            pending.add_metric([name], n)
        yield pending
        sent = CounterMetricFamily(
            "steamedge_notifications_delivered",
            "Notifications delivered since start.",
            labels=["channel"],
        )
        for name, n in sorted(v.notifications_sent.items()):
            sent.add_metric([name], n)
        yield sent
        failed = CounterMetricFamily(
            "steamedge_notification_failures",
            "Failed delivery attempts since start (the outbox keeps the message).",
            labels=["channel"],
        )
        for name, n in sorted(v.notifications_failed.items()):
            failed.add_metric([name], n)
        yield failed

    def _service(self, v: LiveView) -> Iterator[Metric]:
        yield CounterMetricFamily(
            "steamedge_evaluations", "Evaluation passes since start.", value=v.evaluations
        )
        yield CounterMetricFamily(
            "steamedge_evaluation_seconds",
            "CPU-bound time spent in evaluation passes since start.",
            value=v.evaluation_seconds,
        )
        if v.last_evaluation:
            yield GaugeMetricFamily(
                "steamedge_last_evaluation_timestamp_seconds",
                "When the last evaluation pass ran (Unix time).",
                value=v.last_evaluation,
            )
        reloads = CounterMetricFamily(
            "steamedge_config_reloads", "Configuration reloads by result.", labels=["result"]
        )
        for result in ("ok", "rejected"):
            reloads.add_metric([result], v.reloads.get(result, 0))
        yield reloads
        yield GaugeMetricFamily(
            "steamedge_storage_ok",
            "1 while the journal file can be written.",
            value=int(v.storage_ok),
        )
        if v.started:
            yield GaugeMetricFamily(
                "steamedge_start_time_seconds", "When the monitor started.", value=v.started
            )


def _bound(b: float) -> str:
    return repr(float(b))


def _hint_code(hint: str) -> str:
    """A bounded label from a hint sentence: the fix it proposes ("reference: gauge",
    "unit: psi", ...), whose set of values is small; the API gives the sentence."""
    _, sep, fix = hint.rpartition(": set ")
    fix = fix.strip().rstrip(".")
    return fix if sep and 0 < len(fix) <= 60 else "check_configuration"


def build_registry(view: Callable[[], LiveView], registry: CollectorRegistry | None = None) -> Any:
    """A registry (fresh unless given) with the monitor's collector registered in it."""
    registry = registry if registry is not None else CollectorRegistry(auto_describe=False)
    registry.register(MonitorCollector(view))
    return registry
