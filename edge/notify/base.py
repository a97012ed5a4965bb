"""What every notification channel shares: the queued item, the channel port, the URL
policy, secrets, the priority and kind filters, and the retry delay.

A channel is one small interface (``deliver`` a batch, ``refresh`` what must be kept alive,
``restore`` after a restart, ``aclose``); ``edge.notify.build_channel`` picks the
implementation from the config. Everything here is pure.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Protocol, runtime_checkable

from yarl import URL

from edge import config
from edge.alarms.events import LIFT_KINDS
from edge.config.rules import channel_url_problem, is_loopback
from edge.errors import ConfigError, ConfigProblem, DeliveryFailed
from edge.model import AlarmEvent

__all__ = [
    "ACTIVE_KINDS",
    "ENDED_KINDS",
    "BaseChannel",
    "Channel",
    "DeliveryFailed",
    "OutboxItem",
    "check_url",
    "is_loopback",
    "iso_utc",
    "opens",
    "priority_passes",
    "wants",
]

# Event kinds after which the alarm stands (announce it) and after which it no longer
# needs attention from a remote receiver (close it). Other kinds (acknowledged, unshelved,
# ...) are news for a person reading a webhook, not a change for Alertmanager.
ACTIVE_KINDS = frozenset({"raised", "realarm"})
ENDED_KINDS = frozenset({"cleared", "returned", "shelved", "suppressed", "out_of_service"})
# LIFT_KINDS (edge.alarms.events): events that lift a mask; with the alarm still active
# they announce it again (their state is then "unacknowledged"), with no separate "raised".


def opens(event: AlarmEvent) -> bool:
    """Whether after this event the alarm stands and is announced (open an alert)."""
    return event.kind in ACTIVE_KINDS or (
        event.kind in LIFT_KINDS and event.state == "unacknowledged"
    )


@dataclass(frozen=True, slots=True)
class OutboxItem:
    """One queued notification: an event waiting for (or delivered to) one channel."""

    id: int  # outbox row id
    channel: str
    key: str  # idempotency key, "site/<journal id>"
    event: AlarmEvent
    site: str
    created: float  # when it was queued (epoch seconds)
    attempts: int = 0


@runtime_checkable
class Channel(Protocol):
    """The port a delivery worker drives."""

    name: str
    config: config.Channel
    refresh_interval: float | None  # seconds between refreshes, None: nothing to refresh

    async def deliver(self, batch: list[OutboxItem]) -> None:
        """Send the batch as one message; raise NotifyError (DeliveryFailed) on failure."""
        ...

    async def refresh(self) -> None:
        """Re-send whatever the receiver forgets unless reminded (active alerts)."""
        ...

    def restore(self, delivered: list[OutboxItem], *, site: str = "") -> None:
        """After a restart: the latest delivered item of every alarm on this channel."""
        ...

    async def aclose(self) -> None: ...


class BaseChannel:
    """Defaults for channels with nothing to refresh or restore."""

    refresh_interval: float | None = None

    def __init__(self, cfg: config.Channel) -> None:
        self.config = cfg
        self.name = cfg.name

    async def refresh(self) -> None:
        return None

    def restore(self, delivered: list[OutboxItem], *, site: str = "") -> None:
        return None

    async def aclose(self) -> None:
        return None


def _rank(priority: str) -> int:
    try:
        return config.PRIORITIES.index(priority)
    except ValueError:
        return 0  # an unknown priority is treated as the most urgent: never filtered out


def priority_passes(min_priority: str, priority: str) -> bool:
    """True when ``priority`` is at least as urgent as ``min_priority``."""
    return _rank(priority) <= _rank(min_priority)


def wants(cfg: config.Channel, event: AlarmEvent) -> bool:
    """Whether this channel takes this event (priority floor; Alertmanager: only kinds that
    open or close an alert)."""
    if not priority_passes(cfg.min_priority, event.priority):
        return False
    if cfg.alertmanager:
        return opens(event) or event.kind in ENDED_KINDS
    return True


def check_url(url: str, *, allow_plain_http: bool, where: str) -> URL:
    """The channel URL policy (``edge.config.rules.channel_url_problem``): https anywhere,
    plain http only to a loopback address unless ``allow_plain_http: true``."""
    problem = channel_url_problem(url, allow_plain_http)
    if problem is not None:
        raise ConfigError([ConfigProblem(where, problem)])
    return URL(url)


def iso_utc(t: float) -> str:
    """Epoch seconds as ISO 8601 in UTC with milliseconds, e.g. 2024-05-01T12:00:00.000Z."""
    return datetime.fromtimestamp(t, UTC).isoformat(timespec="milliseconds").replace("+00:00", "Z")
