"""The shell: the running monitor (start, stop, reload), its owned tasks, the HTTP server,
the notification wiring, the point log and systemd notification. The one place where
adapters are wired together."""

from __future__ import annotations

from edge.service.monitor import (
    Monitor,
    serve,
)

__all__ = [
    "Monitor",
    "serve",
]
