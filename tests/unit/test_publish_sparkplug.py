"""Sparkplug B payloads and session rules (Eclipse Sparkplug 3.0), decoded with the
specification's protobuf schema compiled by protoc at test time."""

from __future__ import annotations

import itertools

from edge.model import AlarmEvent
from edge.publish import SparkplugNode, alarm_record, point_record, source_record, wire
from tests.integration.sparkplug_schema import parse, sparkplug_pb2
from tests.unit.publish_points import point

T = 1_764_756_000.0  # an instant, s
T_MS = 1_764_756_000_000


def node(**kw) -> SparkplugNode:
    args = dict(
        group="plant-fleet",
        node="riverside-laundry",
        points=["drum", "header"],
        sources=["boiler-plc"],
        alarms=["drum-pressure-high"],
        properties={"Advisory notice": "advisory only"},
    )
    args.update(kw)
    return SparkplugNode(**args)


def born(n: SparkplugNode | None = None) -> SparkplugNode:
    n = n or node()
    n.connect(T_MS)
    n.birth({("point", "drum"): point_record(point("drum"), T)}, T_MS)
    return n


def metrics_by_name(payload: bytes) -> dict:
    return {m.name: m for m in parse(payload).metrics}


def test_protobuf_varint_encoding():
    """150 -> 96 01 and 300 -> ac 02 (Protocol Buffers encoding guide, "Base 128 varints")."""
    assert wire.varint(150) == b"\x96\x01"
    assert wire.varint(300) == b"\xac\x02"


def test_will_is_ndeath_with_bdseq_only():
    """The will: NDEATH topic, QoS 1, not retained, one metric bdSeq, no seq
    (Sparkplug 3.0, tck-id-topics-ndeath-payload, -ndeath-seq)."""
    will = node().connect(T_MS)
    p = parse(will.payload)
    assert will.topic == "spBv1.0/plant-fleet/NDEATH/riverside-laundry"
    assert (will.qos, will.retain) == (1, False)
    assert [(m.name, m.long_value) for m in p.metrics] == [("bdSeq", 0)]
    uint64 = sparkplug_pb2().DataType.Value("UInt64")
    assert p.metrics[0].datatype == uint64  # Sparkplug 3.0, chapter 6, the NBIRTH example
    assert not p.HasField("seq")


def _session_bd_seq(n: SparkplugNode) -> int:
    will = n.connect(T_MS)
    n.connected()
    return parse(will.payload).metrics[0].long_value


def test_bdseq_starts_at_zero_and_counts_connections():
    """bdSeq 0 on the first CONNECT, then 1, 2 (tck-id-topics-nbirth-bdseq-increment)."""
    n = node()
    assert [_session_bd_seq(n) for _ in range(3)] == [0, 1, 2]


def test_attempt_the_broker_never_took_keeps_the_bdseq():
    """A CONNECT that failed (refused, unreachable) leaves no will: the retry reuses its
    bdSeq, so the births a host sees count 0, 1, 2 without holes."""
    n = node()
    n.connect(T_MS)  # failed
    assert _session_bd_seq(n) == 0 and _session_bd_seq(n) == 1


def test_bdseq_wraps_after_255():
    """bdSeq after 255 is 0 (Sparkplug 3.0, tck-id-payloads-nbirth-bdseq-inc)."""
    n = node(bd_seq=255)
    assert [_session_bd_seq(n) for _ in range(2)] == [255, 0]


def test_nbirth_seq_zero_with_bdseq_and_rebirth_metric():
    """NBIRTH: seq 0, bdSeq of the will, 'Node Control/Rebirth' boolean false
    (tck-id-topics-nbirth-seq-num, -bdseq-matching, -rebirth-metric)."""
    n = node()
    will = n.connect(T_MS)
    nbirth = n.birth({}, T_MS)[0]
    p = parse(nbirth.payload)
    m = metrics_by_name(nbirth.payload)
    pb = sparkplug_pb2()
    assert nbirth.topic == "spBv1.0/plant-fleet/NBIRTH/riverside-laundry"
    assert (nbirth.qos, nbirth.retain) == (0, False)
    assert p.seq == 0 and p.timestamp == T_MS
    assert m["bdSeq"].long_value == parse(will.payload).metrics[0].long_value
    rebirth = m["Node Control/Rebirth"]
    assert rebirth.datatype == pb.DataType.Value("Boolean") and rebirth.boolean_value is False


def test_nbirth_carries_the_advisory_notice():
    """The advisory-only notice is a node property metric of the birth."""
    n = node()
    n.connect(T_MS)
    m = metrics_by_name(n.birth({}, T_MS)[0].payload)
    assert m["Properties/Advisory notice"].string_value == "advisory only"


def test_birth_metrics_have_name_alias_datatype():
    """Every birth metric has name, alias and datatype; aliases unique over the node
    (tck-id-topics-nbirth-metrics, -dbirth-metrics)."""
    n = node()
    n.connect(T_MS)
    aliases = []
    for msg in n.birth({}, T_MS):
        for m in parse(msg.payload).metrics:
            assert m.name and m.HasField("alias") and m.HasField("datatype")
            aliases.append(m.alias)
    assert len(aliases) == len(set(aliases))


def test_dbirth_per_point_with_values_and_seq_following():
    """One DBIRTH per point after the NBIRTH, seq 1, 2; the drum's pressure as a Double
    in Pa with its quality property (tck-id-topics-dbirth-topic, -dbirth-seq)."""
    n = node()
    n.connect(T_MS)
    msgs = n.birth({("point", "drum"): point_record(point("drum", p=1_101_325.0), T)}, T_MS)
    assert [m.topic for m in msgs[1:]] == [
        "spBv1.0/plant-fleet/DBIRTH/riverside-laundry/drum",
        "spBv1.0/plant-fleet/DBIRTH/riverside-laundry/header",
    ]
    assert [parse(m.payload).seq for m in msgs] == [0, 1, 2]
    m = metrics_by_name(msgs[1].payload)["pressure"]
    pb = sparkplug_pb2()
    assert m.datatype == pb.DataType.Value("Double") and m.double_value == 1_101_325.0
    props = dict(zip(m.properties.keys, m.properties.values, strict=True))
    assert props["Quality"].int_value == 192 and props["engUnit"].string_value == "Pa"


def test_point_without_data_is_null_in_its_birth():
    """A point with no record yet is born with is_null figures, not zeros."""
    n = node()
    n.connect(T_MS)
    header = n.birth({}, T_MS)[2]
    m = metrics_by_name(header.payload)["pressure"]
    assert m.is_null and not m.HasField("double_value")


def test_ddata_by_alias_with_only_changed_metrics():
    """DDATA holds the changed metrics by alias alone, no names
    (tck-id-topics-ddata-payload; aliases as in the birth)."""
    n = born()
    rec = point_record(point("drum", p=1_200_000.0), T + 1)
    msg = n.data(rec, T_MS + 1000)[0]
    p = parse(msg.payload)
    assert msg.topic == "spBv1.0/plant-fleet/DDATA/riverside-laundry/drum"
    assert all(not m.name for m in p.metrics)
    alias = {d.name: d.alias for d in n.defs if d.device == "drum"}
    assert {m.alias for m in p.metrics} == {alias["pressure"]}
    assert p.metrics[0].double_value == 1_200_000.0 and p.metrics[0].timestamp == T_MS + 1000


def test_unchanged_record_sends_nothing():
    """A heartbeat record with no change is not sent as an empty DDATA."""
    n = born()
    assert n.data(point_record(point("drum"), T + 60), T_MS + 60_000) == []


def test_seq_wraps_from_255_to_0():
    """seq runs 1..255 then 0 (tck-id-topics-ddata-seq-num)."""
    n = born()
    seqs = [parse(n.birth({}, T_MS)[-1].payload).seq]
    for k in range(300):
        rec = point_record(point("drum", p=1e6 + 10_000 * k), T + k)
        seqs.append(parse(n.data(rec, T_MS)[0].payload).seq)
    assert seqs[:3] == [2, 3, 4]
    assert seqs[253:256] == [255, 0, 1]
    assert all((b - a) % 256 == 1 for a, b in itertools.pairwise(seqs))


def test_stored_values_are_historical():
    """A value that waited in the queue goes with is_historical set."""
    n = born()
    rec = point_record(point("drum", p=1_300_000.0), T - 30)
    m = parse(n.data(rec, T_MS, historical=True)[0].payload).metrics
    assert m and all(x.is_historical for x in m)


def test_alarm_event_is_ndata_with_journal_id():
    """An alarm event goes as NDATA: event kind, journal id, state, by alias."""
    n = born()
    e = AlarmEvent(
        alarm="drum-pressure-high",
        kind="raised",
        time=T,
        priority="high",
        value=1.3e6,
        state="unack_active",
        message="Drum pressure high",
        id=42,
    )
    msg = n.data(alarm_record(e), T_MS)[0]
    alias = {d.alias: d.name for d in n.defs}
    got = {alias[m.alias]: m for m in parse(msg.payload).metrics}
    assert msg.topic == "spBv1.0/plant-fleet/NDATA/riverside-laundry"
    assert got["Alarms/drum-pressure-high/event"].string_value == "raised"
    assert got["Alarms/drum-pressure-high/event_id"].long_value == 42
    assert got["Alarms/drum-pressure-high/state"].string_value == "unack_active"


def test_source_health_is_ndata():
    """A source going down is an NDATA with Sources/<name>/up false."""
    n = born()
    health = type(
        "H",
        (),
        {"up": False, "errors": {"timeout": 3}, "last_error": "timed out", "last_read_time": T},
    )()
    msg = n.data(source_record("boiler-plc", health, T), T_MS)[0]
    alias = {d.alias: d.name for d in n.defs}
    got = {alias[m.alias]: m for m in parse(msg.payload).metrics}
    assert got["Sources/boiler-plc/up"].boolean_value is False
    assert got["Sources/boiler-plc/errors"].long_value == 3


def test_rebirth_command_is_recognised():
    """NCMD 'Node Control/Rebirth' = true asks for a rebirth."""
    pb = sparkplug_pb2()
    cmd = pb.Payload(timestamp=T_MS)
    m = cmd.metrics.add()
    m.name, m.datatype, m.boolean_value = "Node Control/Rebirth", 11, True
    n = born()
    assert n.command(n.topic("NCMD"), cmd.SerializeToString()) == "rebirth"


def test_other_commands_are_refused():
    """Any other NCMD or a DCMD writes nothing: it is refused (advisory only)."""
    pb = sparkplug_pb2()
    cmd = pb.Payload(timestamp=T_MS)
    m = cmd.metrics.add()
    m.name, m.datatype, m.double_value = "pressure", 10, 5.0
    n = born()
    assert n.command(n.topic("DCMD", "drum"), cmd.SerializeToString()) == "refused"
    assert n.command(n.topic("NCMD"), b"\xff\xff") == "refused"


def test_rebirth_keeps_bdseq_and_restarts_seq():
    """A rebirth on the same connection: NBIRTH seq 0 again, same bdSeq."""
    n = born()
    n.data(point_record(point("drum", p=1.2e6), T + 1), T_MS)
    again = n.birth({}, T_MS)
    m = metrics_by_name(again[0].payload)
    assert parse(again[0].payload).seq == 0 and m["bdSeq"].long_value == 0


def test_point_losing_its_plc_gets_a_ddeath_once():
    """A point gone bad/comm_loss: one DDEATH (seq +1, no metrics), then silence while it
    stays lost (Sparkplug 3.0, DDEATH on behalf of a device that does not answer)."""
    n = born()
    lost = point_record(point("drum", p=None), T + 1)
    assert lost["reason"] == "comm_loss"
    (death,) = n.data(lost, T_MS + 1000)
    p = parse(death.payload)
    assert death.topic == "spBv1.0/plant-fleet/DDEATH/riverside-laundry/drum"
    assert p.seq == 3 and len(p.metrics) == 0 and p.timestamp == T_MS + 1000
    assert n.data(lost, T_MS + 2000) == []


def test_point_back_from_a_ddeath_is_born_again():
    """The point answering again: a DBIRTH with every metric by name, not a DDATA."""
    n = born()
    n.data(point_record(point("drum", p=None), T + 1), T_MS)
    (again,) = n.data(point_record(point("drum", p=1_200_000.0), T + 2), T_MS + 2000)
    m = metrics_by_name(again.payload)
    assert again.topic == "spBv1.0/plant-fleet/DBIRTH/riverside-laundry/drum"
    assert m["pressure"].double_value == 1_200_000.0 and "quality" in m
    assert parse(again.payload).seq == 4
