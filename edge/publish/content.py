"""What is published, as plain JSON-able records (the queue stores them; each format turns
them into topics and payloads when they are sent). Pure.

Every record has ``type`` (``point`` | ``source`` | ``alarm``), ``name`` and ``time``
(milliseconds since the epoch, UTC). Figures are SI: pressure absolute in Pa, temperatures
and differences in K, enthalpy J/kg, entropy J/(kg K), density kg/m3.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from edge.model import AlarmEvent, PointState, Sample
from edge.publish.exception import hints_of, phase_of

__all__ = ["Message", "Record", "alarm_record", "ms", "point_record", "source_record"]

Record = dict[str, Any]


@dataclass(frozen=True, slots=True)
class Message:
    """One MQTT message to publish."""

    topic: str
    payload: bytes
    qos: int = 0
    retain: bool = False


def ms(t: float) -> int:
    """Seconds since the epoch -> whole milliseconds (Sparkplug timestamps are ms)."""
    return round(t * 1000.0)


def _number(v: float | None) -> float | None:
    return float(v) if v is not None and math.isfinite(v) else None


def point_record(
    p: PointState, now: float, inputs: Mapping[str, Sample | None] | None = None
) -> Record:
    """A point's figures with their quality; ``inputs`` (pressure/temperature -> the
    sample read) gives the source time: the older of the inputs' PLC/server times."""
    values: dict[str, Any] = {}
    for q, r in sorted(p.readings.items()):
        values[q] = {
            "value": _number(r.value) if r.usable else None,
            "unit": r.unit,
            "quality": r.quality.name,
            "reason": r.quality.reason,
        }
    times = [s.source_time for s in (inputs or {}).values() if s is not None and s.source_time]
    return {
        "type": "point",
        "name": p.name,
        "time": ms(now),
        "source_time": ms(min(times)) if times else None,
        "quality": p.quality.name,
        "reason": p.quality.reason,
        "state": p.state,
        "phase": phase_of(p),
        "hints": list(hints_of(p)),
        "values": values,
    }


def source_record(name: str, health: Any, now: float) -> Record:
    """A source's health: up, errors counted by kind, the last error text."""
    errors = dict(getattr(health, "errors", {}) or {})
    return {
        "type": "source",
        "name": name,
        "time": ms(now),
        "up": bool(getattr(health, "up", False)),
        "errors": int(sum(errors.values())),
        "last_error": str(getattr(health, "last_error", "") or ""),
        "last_read": ms(health.last_read_time) if getattr(health, "last_read_time", 0) else None,
    }


def alarm_record(e: AlarmEvent) -> Record:
    """One journal event; ``id`` is the journal's, so a receiver can spot a repeat."""
    return {
        "type": "alarm",
        "name": e.alarm,
        "time": ms(e.time),
        "id": e.id,
        "kind": e.kind,
        "priority": e.priority,
        "state": e.state,
        "value": _number(e.value),
        "limit": _number(e.limit),
        "quality": e.quality,
        "message": e.message,
        "user": e.user,
        "comment": e.comment,
    }
