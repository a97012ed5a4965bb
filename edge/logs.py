"""Logging: structlog, one event per line, JSON lines to stdout by default.

``configure(fmt="json" | "console", level="info")`` sets it up once per process; modules
take a logger with ``get_logger(component=...)`` and bind context (source, point, alarm).
A redacting processor blanks every field whose name says it holds a secret, so a token,
password or webhook secret can never reach a log line even by mistake.
"""

from __future__ import annotations

import contextlib
import importlib
import importlib.util
import logging
import re
import sys
import threading
import time
from collections.abc import Iterator, MutableMapping
from types import ModuleType
from typing import IO, Any


def _import_structlog() -> ModuleType:
    """structlog without rich. ``structlog.dev`` loads rich for console tracebacks whenever
    it is installed (the demo's live view needs it); a daemon writing JSON lines would
    carry it (~5 MiB resident) for nothing. ``configure("console")`` brings it back."""
    if "structlog" in sys.modules or "rich" in sys.modules:
        return importlib.import_module("structlog")
    sys.modules["rich"] = None  # type: ignore[assignment]  # `import rich` -> ImportError
    try:
        return importlib.import_module("structlog")
    finally:
        del sys.modules["rich"]


structlog = _import_structlog()

__all__ = [
    "SECRET_WORDS",
    "TALLY",
    "Limited",
    "Tally",
    "configure",
    "get_logger",
    "held_back",
    "redact",
]

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
    if fmt == "console" and structlog.dev.rich is None and importlib.util.find_spec("rich"):
        importlib.reload(structlog.dev)  # rich tracebacks for a human at a terminal
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


# libraries whose log lines are folded: counted, rate-limited, one line without traceback
LIBRARIES = ("pymodbus", "asyncua", "asyncio", "aiomqtt", "aiohttp")
_DIGITS = re.compile(r"0x[0-9a-fA-F]+|\d+")


class _LibraryNoise(logging.Filter):
    """A library that logs one ERROR per bad frame (pymodbus) or a traceback per poll must
    not flood the log: each kind of line (logger, level, message with the numbers blanked)
    comes at most 5 times a minute, without its traceback (the exception in one line), with
    ``suppressed=N`` saying how many were held back; every line is counted in
    ``steamedge_guard_events_total{component="library", kind="<library>_<level>"}``."""

    def __init__(self) -> None:
        super().__init__()
        self._limited = Limited(None, window=60.0, burst=5)

    def filter(self, record: logging.LogRecord) -> bool:
        lib = record.name.split(".")[0]
        if lib not in LIBRARIES:
            return True
        TALLY.add("library", f"{lib}_{record.levelname.lower()}")
        template = _DIGITS.sub("#", str(record.msg))[:60]  # numbers and hex dumps vary
        ok, held = self._limited.admit(f"{record.name}:{record.levelno}:{template}")
        if not ok:
            return False
        message = " ".join(record.getMessage().split())[:300]
        if record.exc_info and record.exc_info[1] is not None:
            exc = record.exc_info[1]
            message += f" ({type(exc).__name__}: {' '.join(str(exc).split())[:200]})"
        record.msg, record.args = message, None
        record.exc_info, record.exc_text, record.stack_info = None, None, None
        if held:
            record.msg += f" [{held} like it suppressed]"
        return True


def _capture_stdlib(out: IO[str], renderer: Any, level: int) -> None:
    handler = logging.StreamHandler(out)
    handler.addFilter(_LibraryNoise())
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


@contextlib.contextmanager
def held_back(library: str) -> Iterator[None]:
    """Hold back a library's own log lines (below CRITICAL) for the block: a one-shot
    command that reports each failure as one readable line of its own (the probes) keeps
    pymodbus's frame dumps and asyncua's tracebacks out of its output."""
    logger = logging.getLogger(library)
    before = logger.level
    logger.setLevel(logging.CRITICAL)
    try:
        yield
    finally:
        logger.setLevel(before)


def get_logger(**context: Any) -> Any:
    """A bound logger carrying ``context`` (e.g. ``component="service"``)."""
    return structlog.get_logger().bind(**context)


class Tally:
    """Counts of hostile or faulty input handled without harm, by (component, kind):
    quarantined journal rows, dropped outbox rows, refused HTTP requests, folded library
    log lines. ``steamedge_guard_events_total`` exports them."""

    def __init__(self) -> None:
        self._counts: dict[tuple[str, str], int] = {}
        self._lock = threading.Lock()

    def add(self, component: str, kind: str, n: int = 1) -> None:
        with self._lock:
            key = (component, kind)
            self._counts[key] = self._counts.get(key, 0) + n

    def snapshot(self) -> dict[tuple[str, str], int]:
        with self._lock:
            return dict(self._counts)


TALLY = Tally()  # the process's tally (one monitor per process)


class Limited:
    """A log whose lines of one key come at most ``burst`` times per ``window`` seconds;
    the lines held back are counted and the next line written says how many
    (``suppressed=N``). For events an outsider can trigger at will (bad requests, floods,
    a faulty PLC), so nobody can fill the disk through the log."""

    def __init__(
        self,
        log: Any,
        *,
        window: float = 60.0,
        burst: int = 5,
        clock: Any = time.monotonic,
    ) -> None:
        self._log = log
        self._window = window
        self._burst = burst
        self._clock = clock
        self._seen: dict[str, tuple[float, int, int]] = {}  # key -> (start, written, held)
        self._lock = threading.Lock()

    def admit(self, key: str) -> tuple[bool, int]:
        """(may a line of ``key`` be written now, how many were held back before it)."""
        now = self._clock()
        with self._lock:
            start, written, held = self._seen.get(key, (now, 0, 0))
            if now - start >= self._window:
                start, written = now, 0
            if written >= self._burst:
                self._seen[key] = (start, written, held + 1)
                return False, held + 1
            self._seen[key] = (start, written + 1, 0)
            if len(self._seen) > 1000:  # keys are bounded by the caller; this is a backstop
                self._seen = {key: self._seen[key]}
        return True, held

    def __call__(self, level: str, event: str, *, key: str | None = None, **fields: Any) -> bool:
        """Write ``event`` at ``level`` unless its key is over its budget; True if written."""
        ok, held = self.admit(key if key is not None else event)
        if not ok:
            return False
        if held:
            fields["suppressed"] = held
        getattr(self._log, level)(event, **fields)
        return True
