"""Webhook channel: one signed JSON POST per batch of events.

Body (UTF-8 JSON)::

    {"site": "riverside-laundry",
     "advisory": "<edge.ADVISORY_NOTICE>",
     "events": [{"key": "riverside-laundry/42", "alarm": "...", "kind": "raised",
                 "priority": "high", "state": "...", "time": "2024-05-01T12:00:00.000Z",
                 "value": 1.5, "limit": 2.0, "quality": "good", "message": "...",
                 "user": null, "comment": null}, ...],
     "grouped": 1}

Values and limits are SI (pascal, kelvin); ``message`` carries them in display units.
Delivery is at-least-once: a receiver drops an event whose ``key`` it has seen before.

Headers:

- ``X-SteamEdge-Timestamp``: Unix time in whole seconds when this attempt was signed.
- ``X-SteamEdge-Signature``: ``sha256=`` + lowercase hex of
  HMAC-SHA256(key = the secret's UTF-8 bytes, message = timestamp + "." + body bytes),
  present when the channel has ``secret_env`` or ``secret_file`` (a secret file's trailing
  newline is stripped). Every retry is signed afresh with a new timestamp.
- ``Idempotency-Key``: the event key, when the message carries exactly one event.

A receiver checks it with ``verify_signature`` below (standard library only, copy freely),
rejects timestamps too far from its own clock, then deduplicates by key.

URL policy: https with the system's certificate store (verified); plain http only to a
loopback address unless the channel says ``allow_plain_http: true``. Redirects are not
followed.
"""

from __future__ import annotations

import hashlib
import hmac
import json
import time
from collections.abc import Callable
from typing import Any

from edge import ADVISORY_NOTICE, __version__, config
from edge.config import read_secret
from edge.logs import get_logger
from edge.notify.base import (
    BaseChannel,
    OutboxItem,
    check_url,
    iso_utc,
)
from edge.notify.http import HttpClient, safe_url

__all__ = ["WebhookChannel", "build_body", "sign", "verify_signature"]

TIMESTAMP_HEADER = "X-SteamEdge-Timestamp"
SIGNATURE_HEADER = "X-SteamEdge-Signature"
KEY_HEADER = "Idempotency-Key"


def sign(secret: bytes | str, timestamp: str, body: bytes) -> str:
    """The signature header value: ``sha256=<hex of HMAC-SHA256(secret, ts + "." + body)>``."""
    key = secret.encode() if isinstance(secret, str) else secret
    mac = hmac.new(key, timestamp.encode("ascii") + b"." + body, hashlib.sha256)
    return "sha256=" + mac.hexdigest()


def verify_signature(
    secret: bytes | str,
    timestamp: str,
    body: bytes,
    signature: str,
    *,
    now: float | None = None,
    max_age: float | None = None,
) -> bool:
    """True when ``signature`` (the X-SteamEdge-Signature header) matches the body and
    timestamp (the X-SteamEdge-Timestamp header). With ``max_age`` and ``now``, a timestamp
    further than ``max_age`` seconds from ``now`` is refused as a replay."""
    if max_age is not None and now is not None:
        try:
            if abs(now - int(timestamp)) > max_age:
                return False
        except ValueError:
            return False
    key = secret.encode() if isinstance(secret, str) else secret
    try:
        message = timestamp.encode("ascii") + b"." + body
    except UnicodeEncodeError:
        return False
    expected = "sha256=" + hmac.new(key, message, hashlib.sha256).hexdigest()
    return hmac.compare_digest(expected, signature.strip())


def event_dict(item: OutboxItem) -> dict[str, Any]:
    e = item.event
    return {
        "key": item.key,
        "alarm": e.alarm,
        "kind": e.kind,
        "priority": e.priority,
        "state": e.state,
        "time": iso_utc(e.time),
        "value": e.value,
        "limit": e.limit,
        "quality": e.quality,
        "message": e.message,
        "user": e.user,
        "comment": e.comment,
    }


def build_body(site: str, batch: list[OutboxItem]) -> bytes:
    """The JSON body for a batch (events in queue order)."""
    doc = {
        "site": site,
        "advisory": ADVISORY_NOTICE,
        "events": [event_dict(item) for item in batch],
        "grouped": len(batch),
    }
    return json.dumps(doc, separators=(",", ":"), ensure_ascii=False).encode()


class WebhookChannel(BaseChannel):
    """POST each batch as one signed JSON message."""

    def __init__(self, cfg: config.Channel, *, clock: Callable[[], float] = time.time) -> None:
        super().__init__(cfg)
        where = f"notify[{cfg.name}]"
        assert cfg.webhook is not None
        self.url = check_url(cfg.webhook, allow_plain_http=cfg.allow_plain_http, where=where)
        secret = read_secret(cfg.secret_env, cfg.secret_file, key=f"{where}.secret")
        self._secret = None if secret is None else secret.encode()
        self._clock = clock
        self._http = HttpClient(cfg.name, cfg)
        self._log = get_logger(component="notify", channel=cfg.name)
        if self._secret is None:
            self._log.warning("webhook_unsigned", url=safe_url(self.url))

    @property
    def signed(self) -> bool:
        return self._secret is not None

    def headers_for(self, body: bytes, batch: list[OutboxItem]) -> dict[str, str]:
        timestamp = str(int(self._clock()))
        headers = {
            "Content-Type": "application/json",
            "User-Agent": f"steam-edge/{__version__}",
            TIMESTAMP_HEADER: timestamp,
        }
        if self._secret is not None:
            headers[SIGNATURE_HEADER] = sign(self._secret, timestamp, body)
        if len(batch) == 1:
            headers[KEY_HEADER] = batch[0].key
        return headers

    async def deliver(self, batch: list[OutboxItem]) -> None:
        if not batch:
            return
        body = build_body(batch[0].site, batch)
        await self._http.post_json(self.url, body, self.headers_for(body, batch))

    async def aclose(self) -> None:
        await self._http.aclose()
