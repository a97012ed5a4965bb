"""One error tree for the whole package.

    EdgeError
     ├── ConfigError          a user's configuration is wrong (carries every problem found)
     ├── UnitError            a quantity string or unit name could not be understood
     ├── DecodeError          registers cannot be decoded as the tag asks (count, type)
     ├── WireError            bytes that are not a well-formed protobuf message
     ├── SteamError           IF97 cannot answer
     │    ├── OutsideIF97     the state lies outside the IF97 validity range
     │    └── TwoPhaseState   (p, T) sits on the saturation line: the phase is not fixed
     ├── SourceError          a PLC or server could not be read (protocol errors translated)
     │    ├── SourceTimeout
     │    └── SecurityError   certificate, policy or credential refused
     ├── StorageError         the journal/outbox file cannot be opened or written
     ├── HistoryQueryError    a history query names an unknown series or a bad time
     ├── NotifyError          a notification channel refused or failed a delivery
     │    └── DeliveryFailed  one delivery failed; the items stay queued
     ├── UsageError           a mistake on a command line, reported as one line
     │    ├── CalcError       steam-edge calc
     │    └── FlowError       steam-edge flow
     └── OperatorError        an operator action cannot be carried out
          ├── BadOperatorText user/comment text that cannot be recorded (checked first)
          └── UnknownAlarm

Adapters translate library exceptions into these at the boundary (``raise ... from exc``);
the core never sees a library exception and the CLI prints each as one readable line.
"""

from __future__ import annotations

from dataclasses import dataclass


class EdgeError(Exception):
    """Base of every error steam-edge raises on purpose."""


@dataclass(frozen=True, slots=True)
class ConfigProblem:
    """One mistake in a configuration file."""

    path: str  # e.g. "sources[0].tags[2].reference"
    message: str
    file: str | None = None
    line: int | None = None

    def __str__(self) -> str:
        where = ""
        if self.file:
            where = f"{self.file}:{self.line}: " if self.line else f"{self.file}: "
        elif self.line:
            where = f"line {self.line}: "
        path = f"{self.path}: " if self.path else ""
        return f"{where}{path}{self.message}"


class ConfigError(EdgeError):
    """A configuration is invalid; ``problems`` lists every mistake found."""

    def __init__(self, problems: list[ConfigProblem] | str) -> None:
        if isinstance(problems, str):
            problems = [ConfigProblem(path="", message=problems)]
        self.problems = list(problems)
        super().__init__("\n".join(str(p) for p in self.problems))


class UnitError(EdgeError, ValueError):
    """A quantity or unit string could not be parsed."""


class DecodeError(EdgeError, ValueError):
    """The registers cannot be decoded as asked (wrong count, not 16-bit, unknown type)."""


class WireError(EdgeError, ValueError):
    """Bytes that are not a well-formed protobuf message."""


class SteamError(EdgeError):
    """IF97 cannot give an answer for this input."""


class OutsideIF97(SteamError):
    """The state lies outside the IAPWS-IF97 validity range; nothing is extrapolated."""


class TwoPhaseState(SteamError):
    """(p, T) lies on the saturation line, where pressure and temperature do not fix the state."""


class SourceError(EdgeError):
    """A source could not be read. ``kind`` is a short bounded label for metrics."""

    def __init__(self, message: str, *, source: str = "", kind: str = "error") -> None:
        self.source = source
        self.kind = kind
        super().__init__(f"{source}: {message}" if source else message)


class SourceTimeout(SourceError):
    def __init__(self, message: str, *, source: str = "") -> None:
        super().__init__(message, source=source, kind="timeout")


class SecurityError(SourceError):
    def __init__(self, message: str, *, source: str = "") -> None:
        super().__init__(message, source=source, kind="security")


class StorageError(EdgeError):
    """The state file cannot be opened or written (read-only path, full disk, corruption)."""


class HistoryQueryError(EdgeError, ValueError):
    """A history query cannot be answered as asked (unknown point or quantity, bad time)."""


class NotifyError(EdgeError):
    """A channel failed a delivery; the outbox keeps the message and tries again."""


class DeliveryFailed(NotifyError):
    """A delivery failed; the items stay queued. ``status`` is the HTTP status (0 when no
    answer came), ``reason`` a short text, ``retry_after`` what the receiver asked for."""

    def __init__(
        self, channel: str, reason: str, *, status: int = 0, retry_after: float | None = None
    ) -> None:
        self.channel = channel
        self.status = status
        self.reason = reason
        self.retry_after = retry_after
        code = f"HTTP {status}: " if status else ""
        super().__init__(f"notify {channel}: {code}{reason}")


class UsageError(EdgeError):
    """A mistake on a command line, reported as one line."""


class CalcError(UsageError):
    """A mistake on the ``calc`` command line."""


class FlowError(UsageError):
    """A mistake on the ``flow`` command line."""


class OperatorError(EdgeError):
    """An operator action cannot be carried out (unknown alarm, action not allowed now)."""


class BadOperatorText(OperatorError):
    """Operator text (user, comment) that cannot be recorded as given."""

    def __init__(self, field: str, problem: str) -> None:
        self.field = field
        super().__init__(f"'{field}' {problem}")


class UnknownAlarm(OperatorError):
    def __init__(self, name: str) -> None:
        self.name = name
        super().__init__(f"no alarm named {name!r}")
