"""Alertmanager channel (HTTP API v2: ``POST /api/v2/alerts``).

Each alarm is one Alertmanager alert, identified by its labels::

    labels      {alertname: <alarm>, site: <site>, priority: <priority>, severity: <priority>}
    annotations {summary: <message>, advisory: <edge.ADVISORY_NOTICE>, kind, state, event_key}

- raised / realarm: posted with ``startsAt`` (the event time) and no ``endsAt``.
- cleared / returned / shelved / suppressed / out_of_service: posted with ``endsAt`` = the
  event time, which resolves it.
- Alertmanager resolves an alert that was posted without ``endsAt`` once its
  ``resolve_timeout`` (default 5 min) passes without a new post, so every alert this
  channel posted as active is posted again every ``refresh_interval`` (60 s) while it
  stands. The delivery worker does that by itself (``DeliveryWorker.run`` calls
  ``refresh()``), and after a restart it rebuilds the set of active alerts from the outbox
  (``restore``). The service may also hand over the engine's own list of active alarms
  with ``refresh(active)``: alerts not in it are then resolved.

A batch of events goes as one POST (one list), keeping the last event of each alarm.
"""

from __future__ import annotations

import json
import time
from collections.abc import Callable
from typing import Any

from edge import ADVISORY_NOTICE, __version__, config
from edge.logs import get_logger
from edge.model import AlarmEvent
from edge.notify.base import (
    ENDED_KINDS,
    BaseChannel,
    OutboxItem,
    check_url,
    iso_utc,
    opens,
)
from edge.notify.http import HttpClient

__all__ = ["AlertmanagerChannel", "alert_for"]

REFRESH_INTERVAL = 60.0  # seconds; well inside Alertmanager's default resolve_timeout (5 min)


def alert_for(
    site: str,
    event: AlarmEvent,
    *,
    key: str | None = None,
    starts_at: float | None = None,
    ends_at: float | None = None,
) -> dict[str, Any]:
    """One Alertmanager v2 alert for this alarm event (``ends_at`` set: resolved)."""
    annotations = {
        "summary": event.message or event.alarm,
        "advisory": ADVISORY_NOTICE,
        "kind": event.kind,
        "state": event.state,
        "event_key": key or event.key or "",
    }
    alert: dict[str, Any] = {
        "labels": {
            "alertname": event.alarm,
            "site": site,
            "priority": event.priority,
            "severity": event.priority,
        },
        "annotations": {k: v for k, v in annotations.items() if v},
        "startsAt": iso_utc(event.time if starts_at is None else starts_at),
    }
    if ends_at is not None:
        alert["endsAt"] = iso_utc(ends_at)
    return alert


class AlertmanagerChannel(BaseChannel):
    """Opens, keeps alive and resolves one Alertmanager alert per alarm."""

    def __init__(
        self,
        cfg: config.Channel,
        *,
        clock: Callable[[], float] = time.time,
        refresh_interval: float = REFRESH_INTERVAL,
    ) -> None:
        super().__init__(cfg)
        assert cfg.alertmanager is not None
        base = check_url(
            cfg.alertmanager, allow_plain_http=cfg.allow_plain_http, where=f"notify[{cfg.name}]"
        )
        self.url = base.with_path(base.path.rstrip("/") + "/api/v2/alerts")
        self.refresh_interval = refresh_interval
        self._clock = clock
        self._http = HttpClient(cfg.name, cfg)
        self._site = ""
        # alarm -> (event that made it active, its key): what Alertmanager shows as active
        self._active: dict[str, tuple[AlarmEvent, str]] = {}
        self._log = get_logger(component="notify", channel=cfg.name)

    @property
    def active(self) -> dict[str, AlarmEvent]:
        """The alarms this channel holds open in Alertmanager."""
        return {name: ev for name, (ev, _key) in self._active.items()}

    def _started(self, alarm: str, fallback: float) -> float:
        held = self._active.get(alarm)
        return held[0].time if held else fallback

    def alerts_for(self, batch: list[OutboxItem]) -> list[dict[str, Any]]:
        """The alerts a batch turns into: the last event of each alarm."""
        last: dict[str, OutboxItem] = {}
        for item in batch:
            last.pop(item.event.alarm, None)
            last[item.event.alarm] = item
        alerts = []
        for alarm, item in last.items():
            e = item.event
            if e.kind in ENDED_KINDS:
                alerts.append(
                    alert_for(
                        item.site,
                        e,
                        key=item.key,
                        starts_at=min(self._started(alarm, e.time), e.time),
                        ends_at=e.time,
                    )
                )
            else:
                alerts.append(alert_for(item.site, e, key=item.key))
        return alerts

    async def _post(self, alerts: list[dict[str, Any]]) -> None:
        body = json.dumps(alerts, separators=(",", ":"), ensure_ascii=False).encode()
        headers = {"Content-Type": "application/json", "User-Agent": f"steam-edge/{__version__}"}
        await self._http.post_json(self.url, body, headers)

    async def deliver(self, batch: list[OutboxItem]) -> None:
        if not batch:
            return
        await self._post(self.alerts_for(batch))
        self._site = batch[-1].site
        self._track(batch)

    def _track(self, items: list[OutboxItem]) -> None:
        for item in items:
            if opens(item.event):
                self._active[item.event.alarm] = (item.event, item.key)
            elif item.event.kind in ENDED_KINDS:
                self._active.pop(item.event.alarm, None)

    def restore(self, delivered: list[OutboxItem], *, site: str = "") -> None:
        """Rebuild the open alerts from the last delivered item of every alarm."""
        self._site = site or self._site
        self._active.clear()
        self._track(delivered)

    async def refresh(self, active: list[AlarmEvent] | None = None) -> None:
        """Post every open alert again so Alertmanager keeps it. With ``active`` (the
        engine's raising events of the alarms that stand now), that list becomes the open
        set and alerts outside it are resolved now."""
        now = self._clock()
        alerts = []
        opened = dict(self._active)
        if active is not None:
            wanted = {e.alarm: e for e in active}
            for alarm, (event, key) in self._active.items():
                if alarm not in wanted:
                    alerts.append(
                        alert_for(self._site, event, key=key, starts_at=event.time, ends_at=now)
                    )
            opened = {
                alarm: self._active.get(alarm, (e, e.key or "")) for alarm, e in wanted.items()
            }
        alerts += [alert_for(self._site, ev, key=key) for ev, key in opened.values()]
        if alerts:
            await self._post(alerts)
            self._log.debug("alerts_refreshed", count=len(alerts))
        self._active = opened

    async def aclose(self) -> None:
        await self._http.aclose()
