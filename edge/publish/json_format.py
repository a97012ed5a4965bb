"""The JSON format: topics and payloads under a prefix (by default ``steam-edge/<site>``). Pure.

Topics: ``<prefix>/status`` (birth and death: retained, QoS 1), ``<prefix>/points/<point>``,
``<prefix>/sources/<source>``, ``<prefix>/alarms/<alarm>`` (the channel's QoS, not retained).
Every message is one UTF-8 JSON object with ``type``, ``site``, ``session`` (one more per MQTT
connection), ``seq`` (0 on the birth, then one more per message of the session, never
wrapping: a gap means a lost message), ``time`` (ms since the epoch, UTC). The README
documents every field.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Mapping
from typing import Any

from edge.publish.content import Message, Record

__all__ = ["SCHEMA_VERSION", "JsonNode", "valid_prefix"]

SCHEMA_VERSION = 1
_PATHS = {"point": "points", "source": "sources", "alarm": "alarms"}


def valid_prefix(prefix: str) -> bool:
    """A topic prefix: non-empty, no wildcards, no empty level, not starting with '$'
    (MQTT 3.1.1, 4.7: '+' and '#' are filters only, '$' topics belong to the broker)."""
    return (
        bool(prefix)
        and not any(c in prefix for c in "+#\0")
        and not prefix.startswith("$")
        and "" not in prefix.split("/")
    )


def _dumps(obj: Mapping[str, Any]) -> bytes:
    return json.dumps(obj, separators=(",", ":"), ensure_ascii=False, allow_nan=False).encode()


class JsonNode:
    """Births, data and deaths of the JSON format; keeps the session number and seq."""

    def __init__(
        self,
        *,
        prefix: str,
        site: str,
        qos: int,
        points: Iterable[str],
        sources: Iterable[str],
        alarms: Iterable[str],
        properties: Mapping[str, str] | None = None,
        session: int = 0,
    ) -> None:
        self.prefix, self.site, self.qos = prefix, site, qos
        self.points, self.sources, self.alarms = list(points), list(sources), list(alarms)
        self.properties = dict(properties or {})
        self.next_session = session
        self.session: int | None = None
        self.seq = 0
        self.born = False

    @property
    def command_topics(self) -> list[str]:
        return []  # the JSON format takes no commands

    def topic(self, kind: str, name: str | None = None) -> str:
        return f"{self.prefix}/{kind}" if name is None else f"{self.prefix}/{kind}/{name}"

    def connect(self, now_ms: int) -> Message:
        self.session = self.next_session
        self.born = False
        return self.death(now_ms)

    def connected(self) -> None:
        """The broker accepted the connection: the next one is the next session."""
        assert self.session is not None, "connect() first"
        self.next_session = self.session + 1

    @property
    def next_bd_seq(self) -> int:  # the persisted counter, under the name both formats share
        return self.next_session

    def death(self, now_ms: int) -> Message:
        body = {
            "type": "death",
            "online": False,
            "site": self.site,
            "session": self.session,
            "time": now_ms,
        }
        return Message(self.topic("status"), _dumps(body), qos=1, retain=True)

    def birth(self, latest: Mapping[tuple[str, str], Record], now_ms: int) -> list[Message]:
        self.seq = 0
        self.born = True
        body = {
            "type": "birth",
            "schema": SCHEMA_VERSION,
            "online": True,
            "site": self.site,
            "session": self.session,
            "seq": 0,
            "time": now_ms,
            **self.properties,
            "points": self.points,
            "sources": self.sources,
            "alarms": self.alarms,
        }
        return [Message(self.topic("status"), _dumps(body), qos=1, retain=True)]

    def data(self, record: Record, now_ms: int, *, historical: bool = False) -> list[Message]:
        if not self.born:
            return []
        self.seq += 1
        body = {
            **record,
            "site": self.site,
            "session": self.session,
            "seq": self.seq,
            "sent": now_ms,
            "stored": historical,
        }
        topic = self.topic(_PATHS[record["type"]], record["name"])
        return [Message(topic, _dumps(body), qos=self.qos, retain=False)]

    def data_text(
        self, kind: str, name: str, body: str, now_ms: int, *, historical: bool = False
    ) -> list[Message]:
        """``data`` for a record already in JSON text (as the queue holds it): the session
        fields are spliced in front, the record is not parsed and written again."""
        if not self.born:
            return []
        self.seq += 1
        head = (
            f'{{"site":{json.dumps(self.site, ensure_ascii=False)},"session":{self.session},'
            f'"seq":{self.seq},"sent":{now_ms},"stored":{"true" if historical else "false"},'
        )
        payload = (head + body[1:]).encode() if body != "{}" else (head[:-1] + "}").encode()
        return [Message(self.topic(_PATHS[kind], name), payload, qos=self.qos, retain=False)]

    def command(self, topic: str, payload: bytes) -> str | None:
        return None
