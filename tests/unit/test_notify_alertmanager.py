"""Alertmanager alert documents and the open-alert bookkeeping (no network)."""

from edge import ADVISORY_NOTICE
from edge.config import Channel
from edge.model import AlarmEvent
from edge.notify import AlertmanagerChannel, OutboxItem
from edge.notify.alertmanager import alert_for


def _event(alarm: str, kind: str, t: float, n: int) -> AlarmEvent:
    return AlarmEvent(
        alarm=alarm,
        kind=kind,
        time=t,
        priority="critical",
        message=f"{alarm} {kind}",
        state="x",
        id=n,
        key=f"riverside-laundry/{n}",
    )


def _item(alarm: str, kind: str, t: float, n: int) -> OutboxItem:
    e = _event(alarm, kind, t, n)
    return OutboxItem(
        id=n, channel="am", key=e.key or "", event=e, site="riverside-laundry", created=t
    )


def _channel() -> AlertmanagerChannel:
    return AlertmanagerChannel(Channel(name="am", alertmanager="http://127.0.0.1:9093"))


def test_raised_alert_has_labels_and_no_end():
    """A raised alarm becomes an alert with stable labels, startsAt and no endsAt."""
    alert = alert_for("riverside-laundry", _event("feed-low", "raised", 1714564800.0, 4))
    assert alert["labels"] == {
        "alertname": "feed-low",
        "site": "riverside-laundry",
        "priority": "critical",
        "severity": "critical",
    }
    assert alert["startsAt"] == "2024-05-01T12:00:00.000Z"
    assert "endsAt" not in alert
    assert alert["annotations"]["advisory"] == ADVISORY_NOTICE
    assert alert["annotations"]["summary"] == "feed-low raised"
    assert alert["annotations"]["event_key"] == "riverside-laundry/4"


def test_cleared_alert_ends_at_the_event_time_and_starts_at_the_raise():
    """A clear resolves the alert (endsAt) and keeps the original start."""
    ch = _channel()
    ch.restore([_item("feed-low", "raised", 100.0, 1)], site="riverside-laundry")
    (alert,) = ch.alerts_for([_item("feed-low", "cleared", 160.0, 2)])
    assert alert["startsAt"] == "1970-01-01T00:01:40.000Z"
    assert alert["endsAt"] == "1970-01-01T00:02:40.000Z"


def test_batch_keeps_the_last_event_of_each_alarm():
    """raised then cleared in one batch posts one resolved alert for that alarm."""
    ch = _channel()
    alerts = ch.alerts_for(
        [
            _item("feed-low", "raised", 10.0, 1),
            _item("drum-high", "raised", 11.0, 2),
            _item("feed-low", "cleared", 12.0, 3),
        ]
    )
    by_name = {a["labels"]["alertname"]: a for a in alerts}
    assert len(alerts) == 2
    assert "endsAt" in by_name["feed-low"] and "endsAt" not in by_name["drum-high"]


def test_restore_keeps_only_alarms_still_open():
    """After a restart the channel holds open the alarms whose last event raised them."""
    ch = _channel()
    ch.restore(
        [_item("feed-low", "cleared", 5.0, 3), _item("drum-high", "realarm", 6.0, 4)],
        site="riverside-laundry",
    )
    assert list(ch.active) == ["drum-high"]
