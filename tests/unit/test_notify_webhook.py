"""Webhook signing, verification, body and headers (no network)."""

import json

import pytest

from edge import ADVISORY_NOTICE
from edge.config import Channel
from edge.model import AlarmEvent
from edge.notify import OutboxItem, WebhookChannel
from edge.notify.webhook import build_body, sign, verify_signature

SECRET = "riverside-hook-secret"
BODY = b'{"a":1}'
TS = "1714564800"


def _item(n: int = 1, **kw) -> OutboxItem:
    event = AlarmEvent(
        alarm=kw.pop("alarm", "drum-pressure-high"),
        kind=kw.pop("kind", "raised"),
        time=kw.pop("time", 1714564800.25),
        priority=kw.pop("priority", "high"),
        value=1.2e6,
        limit=1.1e6,
        message="Drum pressure 12.0 bar(a) above 11.0 bar(a)",
        state="unack_alarm",
        id=n,
        key=f"riverside-laundry/{n}",
        **kw,
    )
    return OutboxItem(
        id=n, channel="oncall", key=event.key, event=event, site="riverside-laundry", created=0.0
    )


def test_sign_matches_openssl():
    """The signature is HMAC-SHA256 over "<timestamp>.<body>", hex, prefixed sha256=."""
    # reference: `printf '1714564800.{"a":1}' | openssl dgst -sha256 -hmac riverside-hook-secret`
    # (OpenSSL 3.0)
    expected = "2a6a402ff2c4235b3dcf52c1d7f22efb66e8c092524d3ff73e787d9c7e7a0e84"
    assert sign(SECRET, TS, BODY) == f"sha256={expected}"


def test_verify_accepts_a_genuine_signature():
    """verify_signature accepts what sign produced."""
    assert verify_signature(SECRET, TS, BODY, sign(SECRET.encode(), TS, BODY))


def test_verify_rejects_a_changed_body():
    """One changed byte in the body fails verification."""
    assert not verify_signature(SECRET, TS, b'{"a":2}', sign(SECRET, TS, BODY))


def test_verify_rejects_a_changed_timestamp():
    """The timestamp is covered by the signature."""
    assert not verify_signature(SECRET, "1714564801", BODY, sign(SECRET, TS, BODY))


def test_verify_rejects_a_wrong_secret():
    """Another secret gives another signature."""
    assert not verify_signature("other", TS, BODY, sign(SECRET, TS, BODY))


def test_verify_rejects_an_old_timestamp_when_asked():
    """With max_age, a timestamp 10 minutes old is refused as a replay."""
    sig = sign(SECRET, TS, BODY)
    assert not verify_signature(SECRET, TS, BODY, sig, now=int(TS) + 600, max_age=300)
    assert verify_signature(SECRET, TS, BODY, sig, now=int(TS) + 60, max_age=300)


def test_verify_rejects_garbage():
    """A malformed signature or timestamp is a plain False, not an exception."""
    assert not verify_signature(SECRET, TS, BODY, "md5=abc")
    assert not verify_signature(SECRET, "soon", BODY, "sha256=00", now=1.0, max_age=5)


def test_body_carries_site_advisory_and_events():
    """The body names the site, says it is advisory and lists the events in order."""
    doc = json.loads(build_body("riverside-laundry", [_item(1), _item(2, kind="cleared")]))
    assert doc["site"] == "riverside-laundry"
    assert doc["advisory"] == ADVISORY_NOTICE
    assert doc["grouped"] == 2
    assert [e["key"] for e in doc["events"]] == ["riverside-laundry/1", "riverside-laundry/2"]
    assert [e["kind"] for e in doc["events"]] == ["raised", "cleared"]


def test_body_event_fields():
    """Each event has the documented fields, time in ISO 8601 UTC."""
    event = json.loads(build_body("s", [_item(7, user="ops", comment="checked")]))["events"][0]
    assert event == {
        "key": "riverside-laundry/7",
        "alarm": "drum-pressure-high",
        "kind": "raised",
        "priority": "high",
        "state": "unack_alarm",
        "time": "2024-05-01T12:00:00.250Z",  # 1714564800 s is 2024-05-01T12:00:00Z (from memory)
        "value": 1.2e6,
        "limit": 1.1e6,
        "quality": "good",
        "message": "Drum pressure 12.0 bar(a) above 11.0 bar(a)",
        "user": "ops",
        "comment": "checked",
    }


def _channel(monkeypatch, **kw) -> WebhookChannel:
    monkeypatch.setenv("RIVERSIDE_HOOK_SECRET", SECRET)
    cfg = Channel(
        name="oncall",
        webhook="https://hooks.example.invalid/steam",
        secret_env="RIVERSIDE_HOOK_SECRET",
        **kw,
    )
    return WebhookChannel(cfg, clock=lambda: 1714564800.9)


def test_headers_single_event(monkeypatch):
    """One event: timestamp, verifiable signature and Idempotency-Key headers."""
    ch = _channel(monkeypatch)
    body = build_body("riverside-laundry", [_item(3)])
    headers = ch.headers_for(body, [_item(3)])
    assert headers["X-SteamEdge-Timestamp"] == "1714564800"
    assert verify_signature(SECRET, "1714564800", body, headers["X-SteamEdge-Signature"])
    assert headers["Idempotency-Key"] == "riverside-laundry/3"


def test_headers_group_has_no_idempotency_key(monkeypatch):
    """A grouped message leaves deduplication to the keys inside the body."""
    ch = _channel(monkeypatch)
    batch = [_item(1), _item(2)]
    assert "Idempotency-Key" not in ch.headers_for(build_body("s", batch), batch)


def test_unsigned_channel_sends_no_signature():
    """Without a secret the message goes unsigned (loopback relay), with no signature header."""
    ch = WebhookChannel(Channel(name="relay", webhook="http://127.0.0.1:9/hook"))
    assert not ch.signed
    assert "X-SteamEdge-Signature" not in ch.headers_for(b"{}", [_item(1)])


def test_missing_secret_variable_is_a_config_error(monkeypatch):
    """A secret_env naming an unset variable is refused at start, naming the key."""
    from edge.errors import ConfigError

    monkeypatch.delenv("RIVERSIDE_UNSET", raising=False)
    cfg = Channel(name="oncall", webhook="https://h.example.invalid/", secret_env="RIVERSIDE_UNSET")
    with pytest.raises(ConfigError, match=r"notify\[oncall\]\.secret_env: .*RIVERSIDE_UNSET"):
        WebhookChannel(cfg)
