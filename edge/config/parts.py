"""The validated pieces of a config handed to the cross-checks (``checks``, ``bounds``,
``source_checks``, ``flow_checks``), each at its place in the file."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from edge.config.flows import Flow
    from edge.config.schema import Alarm, Barometer, Channel, Http, Point, Storage, Tag

__all__ = ["Parts"]


@dataclass
class Parts:
    """The validated pieces of a config, each at its place in the file (``None`` where the
    piece failed the schema)."""

    barometer: Barometer | None
    sources: list[Any | None]  # ModbusTcpSource | ModbusRtuSource | OpcUaSource
    tags: list[list[Tag | None]]  # per source, in file order
    points: list[Point | None]
    alarms: list[Alarm | None]
    notify: list[Channel | None]
    http: Http | None
    storage: Storage | None
    flows: list[Flow | None] = field(default_factory=list)
    known_names: set[str] = field(default_factory=set)
    publish: list[Any | None] = field(default_factory=list)  # Publish
    site: str | None = None
