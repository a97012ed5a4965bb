"""Whether a host names this machine. One rule for every place that relaxes a check on
loopback: plain-HTTP webhooks, an API without a token, OPC UA without security."""

from __future__ import annotations

import ipaddress

__all__ = ["is_loopback"]


def is_loopback(host: str | None) -> bool:
    """127.0.0.0/8, ::1 (bracketed or not) and ``localhost`` (a name that must resolve to
    loopback)."""
    if not host:
        return False
    if host.lower().rstrip(".") == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        return False
