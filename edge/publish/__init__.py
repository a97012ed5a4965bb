"""Outbound publishing over MQTT (JSON, or Sparkplug B per Eclipse Sparkplug 3.0), with
report by exception and store and forward.

Pure: ``exception`` (report by exception), ``content`` (what is published, as records),
``json_format`` and ``sparkplug`` (topics, payloads, sessions), ``wire`` (the protobuf wire
format). Shell: ``queue`` (the SQLite store-and-forward queue), ``channel`` (the MQTT client
of one channel).
"""

from __future__ import annotations

from edge.publish.content import Message, Record, alarm_record, point_record, source_record
from edge.publish.exception import Deadband, Reporter
from edge.publish.json_format import JsonNode
from edge.publish.sparkplug import SparkplugNode, decode_payload

__all__ = [
    "Deadband",
    "JsonNode",
    "Message",
    "Record",
    "Reporter",
    "SparkplugNode",
    "alarm_record",
    "decode_payload",
    "point_record",
    "source_record",
]
