"""OPC UA DataValue -> Sample, one tag at a time.

The status code's severity gives the quality (Good / Uncertain / Bad), its symbolic name
becomes the reason (``BadSensorFailure``, ``UncertainLastUsableValue``), the source
timestamp is kept, and a number is only taken from a Good or Uncertain value of a numeric
type. Everything else goes through ``condition`` (scale, NE 43, valid range, unit -> SI), so
a tag behaves the same whatever wire it came over.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import UTC, datetime
from typing import Any

from asyncua import ua
from asyncua.ua import status_codes

from edge.config import OpcUaTag
from edge.errors import EdgeError
from edge.model import CONFIG, GOOD, NOT_A_NUMBER, Level, Quality, Sample, bad, uncertain, worst
from edge.sources.condition import Conditioner

__all__ = ["TagChannel", "epoch", "parse_node_id", "status_name", "status_quality"]

_SEVERITY_SHIFT = 30
_CODE_MASK = 0xFFFF0000  # the low 16 bits are info bits (limits, overflow), not the code


def status_name(code: int) -> str:
    """Symbolic name of a status code, e.g. ``BadSensorFailure``; hex if the code is unknown."""
    known = status_codes.code_to_name_doc.get(code & _CODE_MASK)
    return known[0] if known else f"0x{code & _CODE_MASK:08X}"


def status_quality(code: int) -> Quality:
    """Quality of an OPC UA status code: severity 00 good, 01 uncertain, 10/11 bad."""
    severity = (code >> _SEVERITY_SHIFT) & 0b11
    if severity == 0:
        return GOOD
    if severity == 1:
        return uncertain(status_name(code))
    return bad(status_name(code))


def epoch(ts: datetime | None) -> float | None:
    """Seconds since the epoch of an (aware or naive-UTC) OPC UA timestamp."""
    if ts is None:
        return None
    if ts.tzinfo is None:
        ts = ts.replace(tzinfo=UTC)
    return ts.timestamp()


def parse_node_id(text: str) -> ua.NodeId | None:
    """A NodeId from its string form (``ns=2;s=HP.Pressure``), or None if it is malformed."""
    try:
        return ua.NodeId.from_string(text)
    except Exception:
        return None


def _numeric(variant: Any) -> tuple[float | None, str]:
    """The number inside a Variant, or None and the name of what it holds instead."""
    if variant is None:
        return None, "no value"
    value = getattr(variant, "Value", None)
    vtype = getattr(variant, "VariantType", None)
    type_name = getattr(vtype, "name", type(value).__name__)
    if getattr(variant, "is_array", False) or isinstance(value, list | tuple):
        return None, f"an array of {type_name}"
    if value is None:
        return None, "no value"
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None, f"a {type_name}"
    return float(value), type_name


@dataclass
class TagChannel:
    """One configured tag on one source: its NodeId, its last good value and what went
    wrong with it (a malformed NodeId, a monitored item the server refused)."""

    tag: OpcUaTag
    node: ua.NodeId | None = None
    fault: Quality | None = None  # a malformed NodeId: bad/config for good
    refused: Quality | None = None  # the server refused the monitored item this session
    last_good: float | None = None
    latest: Sample | None = None
    explained: set[str] = field(default_factory=set)  # problems already logged once
    conditioner: Conditioner | None = None

    @classmethod
    def build(cls, tag: OpcUaTag) -> TagChannel:
        node = parse_node_id(tag.node)
        try:
            conditioner = Conditioner(tag)
        except EdgeError:  # unknown unit, empty scale: the config check names it
            conditioner = None
        fault = None if node is not None and conditioner is not None else bad(CONFIG)
        return cls(tag, node, fault, conditioner=conditioner)

    def from_data_value(self, dv: Any, receive_time: float) -> tuple[Sample, str | None]:
        """Turn a DataValue into a Sample. The second item explains a non-numeric value
        (``'a String'``) so the caller can log it once."""
        code = getattr(getattr(dv, "StatusCode", None), "value", 0) or 0
        status = status_quality(code)
        source_time = (
            epoch(getattr(dv, "SourceTimestamp", None))
            or epoch(getattr(dv, "ServerTimestamp", None))
            or receive_time
        )
        detail = None
        if status.level is Level.BAD:
            value, quality = math.nan, status
        else:
            raw, what = _numeric(getattr(dv, "Value", None))
            if raw is None:
                value, quality = math.nan, bad(NOT_A_NUMBER)
                detail = f"node {self.tag.node} holds {what}, not a number"
            elif self.conditioner is None:
                value, quality = math.nan, bad(CONFIG)
            else:
                value, conditioned = self.conditioner(raw)
                quality = worst(status, conditioned)
        return self._keep(value, quality, source_time, receive_time), detail

    def lost(self, reason: str, now: float) -> Sample:
        """The sample for a tag whose link is down (bad/config if its NodeId is malformed)."""
        quality = self.fault if self.fault is not None else bad(reason)
        return self._keep(math.nan, quality, now, now)

    def refreshed(self, now: float) -> Sample | None:
        """The latest sample again, received now: the subscription vouches it is current."""
        if self.fault is not None or self.refused is not None:
            quality = self.fault or self.refused
            assert quality is not None
            return self._keep(math.nan, quality, now, now)
        s = self.latest
        if s is None:
            return None
        s = Sample(s.tag, s.value, s.quality, s.source_time, now, s.last_good)
        self.latest = s
        return s

    def _keep(self, value: float, quality: Quality, source_time: float, now: float) -> Sample:
        usable = quality.level is not Level.BAD and math.isfinite(value)
        if usable:
            self.last_good = value
        s = Sample(
            self.tag.name, value, quality, source_time, now, None if usable else self.last_good
        )
        self.latest = s
        return s
