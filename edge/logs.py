"""Logging: structlog, one event per line, JSON lines to stdout by default.

``configure(fmt="json" | "console", level="info")`` sets it up once per process; modules
take a logger with ``get_logger(component=...)`` and bind context (source, point, alarm).
A redacting processor blanks every field whose name says it holds a secret, so a token,
password or webhook secret can never reach a log line even by mistake.
"""

from __future__ import annotations

import logging
import sys
from collections.abc import MutableMapping
from typing import IO, Any

import structlog

__all__ = ["SECRET_WORDS", "configure", "get_logger", "redact"]

# A field whose name contains one of these words is never written out.
SECRET_WORDS = ("token", "password", "secret", "authorization", "private_key", "credential")
REDACTED = "[redacted]"

_LEVELS = {
    "debug": logging.DEBUG,
    "info": logging.INFO,
    "warning": logging.WARNING,
    "error": logging.ERROR,
}


def redact(_logger: Any, _method: str, event: MutableMapping[str, Any]) -> MutableMapping[str, Any]:
    """Blank the value of every field whose name looks like a secret."""
    for key in list(event):
        lowered = key.lower()
        if any(word in lowered for word in SECRET_WORDS) and event[key] is not None:
            event[key] = REDACTED
    return event


def configure(fmt: str = "json", level: str = "info", stream: IO[str] | None = None) -> None:
    """Set structlog up for the whole process: ``json`` lines or a ``console`` view."""
    if fmt not in ("json", "console"):
        raise ValueError(f"log format must be 'json' or 'console', got {fmt!r}")
    if level not in _LEVELS:
        raise ValueError(f"log level must be one of {', '.join(_LEVELS)}, got {level!r}")
    out = stream if stream is not None else sys.stdout
    processors: list[Any] = [
        structlog.contextvars.merge_contextvars,
        structlog.processors.add_log_level,
        structlog.processors.TimeStamper(fmt="iso", utc=True),
        redact,
    ]
    if fmt == "json":
        processors += [
            structlog.processors.format_exc_info,
            structlog.processors.JSONRenderer(sort_keys=False),
        ]
    else:
        processors.append(structlog.dev.ConsoleRenderer(colors=out.isatty()))
    structlog.configure(
        processors=processors,
        wrapper_class=structlog.make_filtering_bound_logger(_LEVELS[level]),
        logger_factory=structlog.WriteLoggerFactory(file=out),
        cache_logger_on_first_use=False,
    )


def get_logger(**context: Any) -> Any:
    """A bound logger carrying ``context`` (e.g. ``component="service"``)."""
    return structlog.get_logger().bind(**context)
