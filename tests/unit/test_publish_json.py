"""The JSON format: topics, birth and death, seq per session, and the record fields the
README documents."""

from __future__ import annotations

import json

from edge.model import AlarmEvent
from edge.publish import JsonNode, alarm_record, point_record
from edge.publish.json_format import valid_prefix
from tests.unit.publish_points import point

T = 1_764_756_000.0
T_MS = 1_764_756_000_000


def node() -> JsonNode:
    return JsonNode(
        prefix="steam-edge/riverside-laundry",
        site="riverside-laundry",
        qos=1,
        points=["drum"],
        sources=["boiler-plc"],
        alarms=["drum-high"],
        properties={"notice": "advisory only", "version": "0.1.0"},
    )


def test_will_is_a_retained_offline_status():
    """The will: <prefix>/status, retained, QoS 1, online false."""
    will = node().connect(T_MS)
    assert will.topic == "steam-edge/riverside-laundry/status"
    assert (will.qos, will.retain) == (1, True)
    assert json.loads(will.payload) == {
        "type": "death",
        "online": False,
        "site": "riverside-laundry",
        "session": 0,
        "time": T_MS,
    }


def test_birth_says_online_with_notice_and_seq_zero():
    """The birth: retained status, online, seq 0, the advisory notice and what is published."""
    n = node()
    n.connect(T_MS)
    (birth,) = n.birth({}, T_MS)
    body = json.loads(birth.payload)
    assert birth.retain and body["online"] is True and body["seq"] == 0
    assert body["notice"] == "advisory only" and body["points"] == ["drum"]


def test_point_message_fields():
    """A point message: topic per point, SI values with unit and quality, source time in ms."""
    n = node()
    n.connect(T_MS)
    n.birth({}, T_MS)
    (msg,) = n.data(point_record(point("drum", p=1_101_325.0), T), T_MS)
    body = json.loads(msg.payload)
    assert msg.topic == "steam-edge/riverside-laundry/points/drum" and msg.qos == 1
    assert body["type"] == "point" and body["seq"] == 1 and body["time"] == T_MS
    assert body["values"]["pressure"] == {
        "value": 1_101_325.0,
        "unit": "Pa",
        "quality": "good",
        "reason": None,
    }
    assert body["quality"] == "good" and body["stored"] is False


def test_bad_value_is_null_not_a_number():
    """A lost pressure is null with quality bad and its reason."""
    n = node()
    n.connect(T_MS)
    n.birth({}, T_MS)
    body = json.loads(n.data(point_record(point("drum", p=None), T), T_MS)[0].payload)
    assert body["values"]["pressure"] == {
        "value": None,
        "unit": "Pa",
        "quality": "bad",
        "reason": "comm_loss",
    }


def test_alarm_message_carries_the_journal_id():
    """An alarm event: <prefix>/alarms/<alarm> with the journal's id and the kind."""
    n = node()
    n.connect(T_MS)
    n.birth({}, T_MS)
    e = AlarmEvent(
        alarm="drum-high",
        kind="acknowledged",
        time=T,
        priority="high",
        state="ack_active",
        user="jo",
        id=7,
    )
    (msg,) = n.data(alarm_record(e), T_MS)
    body = json.loads(msg.payload)
    assert msg.topic == "steam-edge/riverside-laundry/alarms/drum-high"
    assert (body["id"], body["kind"], body["user"]) == (7, "acknowledged", "jo")


def test_seq_runs_on_and_restarts_with_a_new_session():
    """seq 1, 2, 3 in a session; the next connection is session 1 and starts at 0 again."""
    n = node()
    n.connect(T_MS)
    n.connected()
    n.birth({}, T_MS)
    seqs = [json.loads(n.data(point_record(point(), T), T_MS)[0].payload)["seq"] for _ in range(3)]
    assert seqs == [1, 2, 3]
    n.connect(T_MS)
    n.connected()
    (birth,) = n.birth({}, T_MS)
    assert (json.loads(birth.payload)["session"], json.loads(birth.payload)["seq"]) == (1, 0)


def test_nothing_before_the_birth():
    """No data message before the session's birth."""
    n = node()
    n.connect(T_MS)
    assert n.data(point_record(point(), T), T_MS) == []


def test_topic_prefix_rules():
    """No wildcards, no empty level, no '$' start (MQTT 3.1.1, 4.7)."""
    assert valid_prefix("steam-edge/riverside")
    assert not any(valid_prefix(p) for p in ("a/+/b", "a/#", "$SYS/x", "a//b", "", "a/"))


def test_measured_phase_and_hint_are_published():
    """A point's measured phase and commissioning hint are in its message."""
    base = point("drum", hint="drum_p reads gauge but is configured absolute?")
    p = base._replace(phase="superheated")  # as derive gives it on a point state
    rec = point_record(p, T)
    assert rec["phase"] == "superheated"
    assert rec["hints"] == ["drum_p reads gauge but is configured absolute?"]


def test_message_from_queued_text_equals_the_one_from_the_record():
    """A record spliced from its queued JSON text reads the same as one built from it."""
    a, b = node(), node()
    for n in (a, b):
        n.connect(T_MS)
        n.birth({}, T_MS)
    rec = point_record(point("drum", p=1_101_325.0), T)
    (from_record,) = a.data(rec, T_MS, historical=True)
    (from_text,) = b.data_text("point", "drum", json.dumps(rec), T_MS, historical=True)
    assert from_text.topic == from_record.topic
    assert json.loads(from_text.payload) == json.loads(from_record.payload)
