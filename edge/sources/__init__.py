"""Protocol adapters. A new protocol is one new module and one entry in SOURCE_TYPES."""

from __future__ import annotations

import importlib
from typing import Any

from edge.sources.base import Emit, Source, SourceHealth

__all__ = ["SOURCE_TYPES", "Emit", "Source", "SourceHealth", "build_source"]

# protocol -> "module:Class"; imported lazily so a site without OPC UA never loads asyncua
SOURCE_TYPES = {
    "modbus-tcp": "edge.sources.modbus:ModbusSource",
    "modbus-rtu": "edge.sources.modbus:ModbusSource",
    "opcua": "edge.sources.opcua:OpcUaSource",
}


def build_source(config: Any) -> Source:
    """Build the adapter for one ``sources[]`` entry of the config."""
    module, _, cls = SOURCE_TYPES[config.protocol].partition(":")
    return getattr(importlib.import_module(module), cls)(config)
