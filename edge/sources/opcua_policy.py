"""Start-up warnings about OPC UA security settings. Pure and light: ``check`` and
``run`` print them without loading asyncua."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any
from urllib.parse import urlparse

from edge.config import OpcUaSource

__all__ = ["THIS_MACHINE", "security_warnings"]

# Stricter than edge.config.rules.is_loopback on purpose: any host other than these three
# names (127.0.0.2 included) gets the warning, as the OPC UA security rule asks.
THIS_MACHINE = frozenset({"127.0.0.1", "localhost", "::1"})


def _opcua_sources(config: Any) -> Iterable[OpcUaSource]:
    if isinstance(config, OpcUaSource):
        return [config]
    return [s for s in getattr(config, "sources", []) if isinstance(s, OpcUaSource)]


def security_warnings(config: Any) -> list[str]:
    """Warnings to print at start-up for a whole config (or one OPC UA source): security
    policy None towards anything but this machine sends values, and any user name and
    password, as readable plain text."""
    warnings = []
    for src in _opcua_sources(config):
        host = (urlparse(src.endpoint).hostname or "").lower()
        if src.security.policy == "None" and host not in THIS_MACHINE:
            warnings.append(
                f"source {src.name}: OPC UA security policy None towards {host or src.endpoint}: "
                "traffic is neither signed nor encrypted; use Basic256Sha256 or stronger with "
                "mode SignAndEncrypt"
            )
    return warnings
