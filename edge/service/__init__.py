"""The shell: the one place where adapters are wired together.

``monitor`` (start, stop, reload, operator actions), ``view`` (the read side the web app
drives through ``edge.web.port.MonitorPort``, and what /metrics shows), ``tasks`` (owned
source tasks and the evaluation loop), ``http`` (listen policy, API token, the server),
``delivery`` (a delivery worker per notify channel), ``point_log`` (a log line when a
point's quality changes), ``sdnotify`` (systemd readiness and watchdog)."""

from __future__ import annotations

from edge.service.monitor import (
    Monitor,
    serve,
)

__all__ = [
    "Monitor",
    "serve",
]
