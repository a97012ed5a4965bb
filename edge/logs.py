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


def configure(
    fmt: str = "json",
    level: str = "info",
    stream: IO[str] | None = None,
    *,
    capture_stdlib: bool = False,
) -> None:
    """Set structlog up for the whole process: ``json`` lines or a ``console`` view. With
    ``capture_stdlib``, warnings and errors that libraries (pymodbus, asyncua, aiohttp) log
    through the standard ``logging`` module come out the same way, one event per line."""
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
    renderer: Any = (
        structlog.processors.JSONRenderer(sort_keys=False)
        if fmt == "json"
        else structlog.dev.ConsoleRenderer(colors=out.isatty())
    )
    if fmt == "json":
        processors.append(structlog.processors.format_exc_info)
    processors.append(renderer)
    if capture_stdlib:
        _capture_stdlib(out, renderer, max(_LEVELS[level], logging.WARNING))
    structlog.configure(
        processors=processors,
        wrapper_class=structlog.make_filtering_bound_logger(_LEVELS[level]),
        logger_factory=structlog.WriteLoggerFactory(file=out),
        cache_logger_on_first_use=False,
    )


def _capture_stdlib(out: IO[str], renderer: Any, level: int) -> None:
    handler = logging.StreamHandler(out)
    handler.setFormatter(
        structlog.stdlib.ProcessorFormatter(
            processor=renderer,
            foreign_pre_chain=[
                structlog.stdlib.add_log_level,
                structlog.stdlib.add_logger_name,
                structlog.processors.TimeStamper(fmt="iso", utc=True),
                redact,
                structlog.processors.format_exc_info,
            ],
        )
    )
    root = logging.getLogger()
    root.handlers = [handler]
    root.setLevel(level)


def get_logger(**context: Any) -> Any:
    """A bound logger carrying ``context`` (e.g. ``component="service"``)."""
    return structlog.get_logger().bind(**context)
