"""Notifications that survive outages: a durable outbox in the state file, one delivery
worker per channel, webhook and Alertmanager channels.

Wiring (the service)::

    outbox = Outbox(conn, site=cfg.site)                 # same SQLite file as the journal
    workers = [DeliveryWorker(outbox, build_channel(c)) for c in cfg.notify]
    tasks = [asyncio.create_task(w.run()) for w in workers]
    ...
    events = journal.append(new_events)                  # events now carry id and key
    outbox.enqueue(cfg.notify, events)                   # StorageError if it cannot write
    ...
    for t in tasks: t.cancel()                           # then await them

Every message says that the monitor is advisory (``edge.ADVISORY_NOTICE``).
"""

from __future__ import annotations

import time
from collections.abc import Callable

from edge import config
from edge.errors import ConfigError, ConfigProblem
from edge.notify.alertmanager import AlertmanagerChannel
from edge.notify.base import Channel, DeliveryFailed, OutboxItem
from edge.notify.outbox import Outbox
from edge.notify.webhook import WebhookChannel, verify_signature
from edge.notify.worker import DeliveryWorker

__all__ = [
    "AlertmanagerChannel",
    "Channel",
    "DeliveryFailed",
    "DeliveryWorker",
    "Outbox",
    "OutboxItem",
    "WebhookChannel",
    "build_channel",
    "verify_signature",
]


def build_channel(cfg: config.Channel, *, clock: Callable[[], float] = time.time) -> Channel:
    """The channel a config entry describes. Reads its secret now; raises ConfigError for a
    bad URL, a refused plain-http URL or a missing secret."""
    where = f"notify[{cfg.name}]"
    if bool(cfg.webhook) == bool(cfg.alertmanager):
        raise ConfigError([ConfigProblem(where, "give exactly one of 'webhook' or 'alertmanager'")])
    if cfg.webhook:
        return WebhookChannel(cfg, clock=clock)
    return AlertmanagerChannel(cfg, clock=clock)
