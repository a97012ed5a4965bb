"""Sparkplug B (Eclipse Sparkplug 3.0): topics, payloads and the session rules of an Edge
Node. Pure: the shell connects, publishes what this returns and feeds back commands.

The monitor is one Edge Node (``edge_node_id``, by default the site) in a Group; every point
is a Device (``device_id`` = the point's name). Topics follow the namespace
``spBv1.0/<group_id>/<message_type>/<edge_node_id>[/<device_id>]``.

Session rules kept here (the spec's requirement ids in brackets):

- every MQTT CONNECT carries the NDEATH as its will, QoS 1, not retained, whose only metric
  is ``bdSeq`` [topics-ndeath-payload, topics-ndeath-seq: no seq]; ``bdSeq`` starts at 0 and
  goes up by one per CONNECT the broker accepted (wrapping after 255)
  [topics-nbirth-bdseq-increment, payloads-nbirth-bdseq-inc];
- the NBIRTH has seq 0 [topics-nbirth-seq-num], the bdSeq of the will, ``Node Control/Rebirth``
  = false [topics-nbirth-rebirth-metric] and every node metric with name, alias, datatype and
  value; then a DBIRTH per point with every metric of that device [topics-dbirth-metric-reqs];
- NDATA/DDATA carry only metrics that changed, by alias alone, and each message's seq is one
  more than the last, 255 -> 0 [topics-ndata-seq-num, topics-ddata-seq-num]; every payload
  has a timestamp in ms [topics-nbirth-timestamp, ...];
- births and data go with QoS 0, not retained [topics-nbirth-mqtt, topics-ddata-mqtt];
- a point whose PLC does not answer (bad, ``comm_loss``) gets a DDEATH on its behalf (seq +1,
  no metrics) and, when it answers again, a DBIRTH with every metric [topics-ddeath-seq-num];
- an NCMD with ``Node Control/Rebirth`` = true is answered with the whole birth again, same
  bdSeq. No other command is obeyed: the monitor is advisory only and never writes.

Values that waited in the store-and-forward queue while the broker was away go out with
``is_historical`` set, so a host does not take them for the present.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

from edge.model import COMM_LOSS, POINT_QUANTITIES
from edge.publish import wire
from edge.publish.content import Message, Record

__all__ = [
    "BOOLEAN",
    "DATETIME",
    "DOUBLE",
    "INT64",
    "NAMESPACE",
    "REBIRTH",
    "STRING",
    "UINT64",
    "Message",
    "SparkplugNode",
    "decode_payload",
    "valid_id",
]

NAMESPACE = "spBv1.0"
REBIRTH = "Node Control/Rebirth"

# DataType enumeration of the Sparkplug B payload (Eclipse Sparkplug 3.0, section 6.4.16)
INT32 = 3
INT64 = 4
UINT64 = 8
DOUBLE = 10
BOOLEAN = 11
STRING = 12
DATETIME = 13

# quality property of a figure: OPC DA quality word, as Sparkplug hosts read it (from memory)
QUALITY_CODES = {"good": 192, "uncertain": 64, "bad": 0}


def valid_id(text: str) -> bool:
    """A Group, Edge Node or Device id: a non-empty UTF-8 string without '/', '+' or '#'
    (Eclipse Sparkplug 3.0, 1.4.1.8 and the topic rules of MQTT 3.1.1, 4.7.1)."""
    return bool(text) and not any(c in text for c in "/+#")


@dataclass(frozen=True, slots=True)
class _Def:
    name: str
    alias: int
    datatype: int
    device: str | None  # None: a node metric


_POINT_TEXT = ("quality", "reason", "state", "phase", "hints")


def _point_defs(point: str) -> list[tuple[str, int]]:
    out = [(q, DOUBLE) for q in POINT_QUANTITIES]
    out += [(t, STRING) for t in _POINT_TEXT]
    out.append(("source_time", DATETIME))
    return out


def _source_defs(name: str) -> list[tuple[str, int]]:
    base = f"Sources/{name}/"
    return [(base + "up", BOOLEAN), (base + "errors", UINT64), (base + "last_error", STRING)]


_ALARM_FIELDS = (
    ("event", STRING),
    ("event_id", UINT64),
    ("state", STRING),
    ("priority", STRING),
    ("message", STRING),
    ("value", DOUBLE),
)


def _alarm_defs(name: str) -> list[tuple[str, int]]:
    return [(f"Alarms/{name}/{f}", t) for f, t in _ALARM_FIELDS]


# --- payload encoding -----------------------------------------------------------------------


Props = tuple[tuple[str, int, Any], ...]  # (key, datatype, value) of each property


def _property_set(props: Props) -> bytes:
    keys = b"".join(wire.string_field(1, k) for k, _, _ in props)
    values = b""
    for _, datatype, value in props:
        body = wire.uint_field(1, datatype)
        if value is None:
            body += wire.bool_field(2, True)
        elif datatype == STRING:
            body += wire.string_field(8, value)
        else:
            body += wire.uint_field(3, int(value))
        values += wire.bytes_field(2, body)
    return keys + values


def _metric(
    d: _Def,
    value: Any,
    *,
    timestamp: int | None,
    with_name: bool,
    historical: bool = False,
    props: Props | None = None,
) -> bytes:
    body = b""
    if with_name:
        body += wire.string_field(1, d.name)
    body += wire.uint_field(2, d.alias)
    if timestamp is not None:
        body += wire.uint_field(3, timestamp)
    if with_name:  # the datatype is part of the birth; data messages may leave it out
        body += wire.uint_field(4, d.datatype)
    if historical:
        body += wire.bool_field(5, True)
    null = value is None or (isinstance(value, float) and not math.isfinite(value))
    if null:
        body += wire.bool_field(7, True)
    if props:
        body += wire.bytes_field(9, _property_set(props))
    if not null:
        if d.datatype == DOUBLE:
            body += wire.double_field(13, float(value))
        elif d.datatype == BOOLEAN:
            body += wire.bool_field(14, bool(value))
        elif d.datatype == STRING:
            body += wire.string_field(15, str(value))
        else:  # INT64, UINT64, DATETIME: long_value
            body += wire.uint_field(11, int(value))
    return wire.bytes_field(2, body)


def _payload(timestamp: int, metrics: Iterable[bytes], seq: int | None) -> bytes:
    out = wire.uint_field(1, timestamp) + b"".join(metrics)
    if seq is not None:
        out += wire.uint_field(3, seq)
    return out


def decode_payload(data: bytes) -> dict[str, Any]:
    """A Sparkplug B payload as ``{"timestamp", "seq", "metrics": [{name, alias, datatype,
    value, ...}]}`` (used for commands; raises ``wire.WireError`` on bad bytes)."""
    fields = wire.decode(data)
    metrics = []
    for raw in fields.get(2, []):
        if not isinstance(raw, bytes):
            raise wire.WireError("metric is not a message")
        m = wire.decode(raw)
        value: Any = None
        for number in (10, 11, 12, 13, 14, 15, 16):
            if number in m:
                value = m[number][-1]
                if number == 14:
                    value = bool(value)
                elif number == 15 and isinstance(value, bytes):
                    value = value.decode("utf-8", "replace")
        name = m.get(1, [None])[-1]
        metrics.append(
            {
                "name": name.decode("utf-8", "replace") if isinstance(name, bytes) else None,
                "alias": m.get(2, [None])[-1],
                "datatype": m.get(4, [None])[-1],
                "is_null": bool(m.get(7, [0])[-1]),
                "value": value,
            }
        )
    return {
        "timestamp": fields.get(1, [None])[-1],
        "seq": fields.get(3, [None])[-1],
        "metrics": metrics,
    }


# --- the Edge Node session ------------------------------------------------------------------


class SparkplugNode:
    """Births, data and deaths of one Edge Node; keeps seq, bdSeq, aliases and what each
    metric last carried (so data holds only what changed)."""

    def __init__(
        self,
        *,
        group: str,
        node: str,
        points: Iterable[str],
        sources: Iterable[str],
        alarms: Iterable[str],
        properties: Mapping[str, str] | None = None,
        bd_seq: int = 0,
    ) -> None:
        self.group, self.node = group, node
        self.points, self.sources, self.alarms = list(points), list(sources), list(alarms)
        self.properties = dict(properties or {})
        self.next_bd_seq = bd_seq % 256  # the bdSeq the next CONNECT will carry
        self.bd_seq: int | None = None  # the current connection's
        self.seq = 0  # the seq of the last message sent in this session
        self.born = False
        # bdSeq as UInt64, as in the NBIRTH example of Eclipse Sparkplug 3.0, chapter 6
        defs: list[tuple[str, int, str | None]] = [
            ("bdSeq", UINT64, None),
            (REBIRTH, BOOLEAN, None),
        ]
        defs += [(f"Properties/{k}", STRING, None) for k in self.properties]
        for s in self.sources:
            defs += [(n, t, None) for n, t in _source_defs(s)]
        for a in self.alarms:
            defs += [(n, t, None) for n, t in _alarm_defs(a)]
        for p in self.points:
            defs += [(n, t, p) for n, t in _point_defs(p)]
        self.defs = [_Def(n, i, t, dev) for i, (n, t, dev) in enumerate(defs)]
        self._by_key = {(d.device, d.name): d for d in self.defs}
        self._last: dict[int, Any] = {}  # alias -> value (and quality) last sent
        self._dead: set[str] = set()  # devices (points) given a DDEATH, not born again yet

    # topics
    def topic(self, kind: str, device: str | None = None) -> str:
        base = f"{NAMESPACE}/{self.group}/{kind}/{self.node}"
        return f"{base}/{device}" if device is not None else base

    @property
    def command_topics(self) -> list[str]:
        return [self.topic("NCMD"), self.topic("DCMD") + "/+"]

    # session
    def connect(self, now_ms: int) -> Message:
        """A new MQTT CONNECT is about to be made: its bdSeq and its will (the NDEATH)."""
        self.bd_seq = self.next_bd_seq
        self.born = False
        return self.death(now_ms)

    def connected(self) -> None:
        """The broker accepted that CONNECT: the next one carries the next bdSeq. (An attempt
        the broker never took, refused or unreachable, left no will behind and uses none.)"""
        assert self.bd_seq is not None, "connect() first"
        self.next_bd_seq = (self.bd_seq + 1) % 256

    def death(self, now_ms: int) -> Message:
        """The NDEATH of the current connection (the will; also sent on a clean stop)."""
        assert self.bd_seq is not None, "connect() first"
        d = self._by_key[(None, "bdSeq")]
        body = _payload(now_ms, [_metric(d, self.bd_seq, timestamp=None, with_name=True)], None)
        return Message(self.topic("NDEATH"), body, qos=1, retain=False)

    def _next_seq(self) -> int:
        self.seq = (self.seq + 1) % 256
        return self.seq

    def birth(self, latest: Mapping[tuple[str, str], Record], now_ms: int) -> list[Message]:
        """NBIRTH (seq 0) and one DBIRTH per point, with the current value of every metric
        (``latest``: the last record of each (type, name))."""
        assert self.bd_seq is not None, "connect() first"
        self._last.clear()
        self.seq = 0
        values = self._values_from(latest)
        node_metrics = []
        for d in self.defs:
            if d.device is not None:
                continue
            if d.name == "bdSeq":
                v, ts, props = self.bd_seq, now_ms, None
            elif d.name == REBIRTH:
                v, ts, props = False, now_ms, None
            elif d.name.startswith("Properties/"):
                v, ts, props = self.properties[d.name[len("Properties/") :]], now_ms, None
            else:
                v, ts, props = values.get(d.alias, (None, now_ms, None))
            self._last[d.alias] = (v, props)
            node_metrics.append(_metric(d, v, timestamp=ts, with_name=True, props=props))
        out = [Message(self.topic("NBIRTH"), _payload(now_ms, node_metrics, 0))]
        self._dead.clear()
        out += [self._device_birth(p, values, now_ms) for p in self.points]
        self.born = True
        return out

    def _device_birth(
        self, device: str, values: Mapping[int, tuple[Any, int, Any]], now_ms: int
    ) -> Message:
        metrics = []
        for d in self.defs:
            if d.device != device:
                continue
            v, ts, props = values.get(d.alias, (None, now_ms, None))
            self._last[d.alias] = (v, props)
            metrics.append(_metric(d, v, timestamp=ts, with_name=True, props=props))
        body = _payload(now_ms, metrics, self._next_seq())
        return Message(self.topic("DBIRTH", device), body)

    def data(self, record: Record, now_ms: int, *, historical: bool = False) -> list[Message]:
        """NDATA or DDATA for one record, holding only the metrics whose value changed (an
        alarm event always goes whole); none when nothing changed or the record names
        something this birth did not declare."""
        if not self.born:
            return []
        kind = record.get("type")
        device = record["name"] if kind == "point" else None
        if device is not None and device not in self.points:
            return []
        if device is not None and not historical:
            lost = record["quality"] == "bad" and str(record["reason"] or "").endswith(COMM_LOSS)
            if lost:  # its PLC does not answer: a DDEATH on the device's behalf, once
                if device in self._dead:
                    return []
                self._dead.add(device)
                return [
                    Message(self.topic("DDEATH", device), _payload(now_ms, [], self._next_seq()))
                ]
            if device in self._dead:  # back: born again with every metric
                self._dead.discard(device)
                values = self._values_from({(kind, device): record})
                return [self._device_birth(device, values, now_ms)]
        changed = []
        for alias, (v, ts, props) in self._values_from({(kind, record["name"]): record}).items():
            if historical:  # the host keeps its present value: send it all, remember none
                pass
            elif kind != "alarm" and self._last.get(alias) == (v, props):
                continue
            else:
                self._last[alias] = (v, props)
            changed.append(
                _metric(
                    self.defs[alias],
                    v,
                    timestamp=ts,
                    with_name=False,
                    historical=historical,
                    props=props,
                )
            )
        if not changed:
            return []
        topic = self.topic("DDATA", device) if device is not None else self.topic("NDATA")
        return [Message(topic, _payload(now_ms, changed, self._next_seq()))]

    def command(self, topic: str, payload: bytes) -> str | None:
        """``"rebirth"`` for an NCMD asking for one; ``"refused"`` for any other command
        (nothing is ever written); None for a message that is not for this node."""
        if topic != self.topic("NCMD") and not topic.startswith(self.topic("DCMD") + "/"):
            return None
        try:
            decoded = decode_payload(payload)
        except (wire.WireError, UnicodeDecodeError):
            return "refused"
        rebirth = self._by_key[(None, REBIRTH)]
        for m in decoded["metrics"]:
            named = m["name"] == REBIRTH or (m["name"] is None and m["alias"] == rebirth.alias)
            if topic == self.topic("NCMD") and named and m["value"] is True:
                return "rebirth"
        return "refused"

    # values
    def _values_from(
        self, latest: Mapping[tuple[str, str], Record]
    ) -> dict[int, tuple[Any, int, Any]]:
        """alias -> (value, timestamp ms, properties) for the metrics these records give."""
        out: dict[int, tuple[Any, int, Any]] = {}
        key = self._by_key
        for (kind, name), r in latest.items():
            ts = int(r["time"])
            if kind == "point":
                for q in POINT_QUANTITIES:
                    d = key.get((name, q))
                    info = r["values"].get(q)
                    if d is None:
                        continue
                    if info is None:
                        out[d.alias] = (None, ts, None)
                        continue
                    props: Props = (
                        ("Quality", INT32, QUALITY_CODES.get(info["quality"], 0)),
                        ("engUnit", STRING, info.get("unit") or ""),
                    )
                    out[d.alias] = (info["value"], ts, props)
                texts = {
                    "quality": r["quality"],
                    "reason": r["reason"],
                    "state": r["state"],
                    "phase": r["phase"],
                    "hints": "; ".join(r["hints"]),
                }
                for t, v in texts.items():
                    d = key.get((name, t))
                    if d is not None:
                        out[d.alias] = (v, ts, None)
                d = key.get((name, "source_time"))
                if d is not None:
                    out[d.alias] = (r["source_time"], ts, None)
            elif kind == "source":
                base = f"Sources/{name}/"
                for field, v in (
                    ("up", r["up"]),
                    ("errors", r["errors"]),
                    ("last_error", r["last_error"]),
                ):
                    d = key.get((None, base + field))
                    if d is not None:
                        out[d.alias] = (v, ts, None)
            elif kind == "alarm":
                base = f"Alarms/{name}/"
                for field, v in (
                    ("event", r["kind"]),
                    ("event_id", r["id"]),
                    ("state", r["state"]),
                    ("priority", r["priority"]),
                    ("message", r["message"]),
                    ("value", r["value"]),
                ):
                    d = key.get((None, base + field))
                    if d is not None:
                        out[d.alias] = (v, ts, None)
        return out
