"""Channel rules that need no network: URL policy, secrets, filters, backoff, times."""

import pytest

from edge.config import Channel
from edge.errors import ConfigError
from edge.model import AlarmEvent
from edge.notify import AlertmanagerChannel, WebhookChannel, build_channel
from edge.notify.base import (
    check_url,
    is_loopback,
    iso_utc,
    priority_passes,
    wants,
)


@pytest.mark.parametrize("host", ["127.0.0.1", "127.20.0.9", "::1", "[::1]", "localhost"])
def test_loopback_hosts(host):
    """IPv4 127/8, IPv6 ::1 and localhost count as loopback."""
    assert is_loopback(host)


@pytest.mark.parametrize("host", ["10.0.0.1", "192.168.1.5", "hooks.example.invalid", "0.0.0.0"])
def test_other_hosts_are_not_loopback(host):
    """Private, unspecified and named hosts are not loopback."""
    assert not is_loopback(host)


def test_https_is_accepted_anywhere():
    """An https URL passes the policy."""
    assert check_url("https://hooks.example.invalid/x", allow_plain_http=False, where="n").host


def test_plain_http_to_loopback_is_accepted():
    """Plain http to 127.0.0.1 passes (tests, a local relay)."""
    assert check_url("http://127.0.0.1:8080/hook", allow_plain_http=False, where="n").port == 8080


def test_plain_http_elsewhere_is_refused():
    """Plain http to another host is a config error that says how to allow it."""
    with pytest.raises(ConfigError, match=r"notify\[oncall\]: plain http .*allow_plain_http"):
        check_url("http://10.1.2.3/hook", allow_plain_http=False, where="notify[oncall]")


def test_plain_http_elsewhere_when_allowed():
    """allow_plain_http: true lets plain http through."""
    assert check_url("http://10.1.2.3/hook", allow_plain_http=True, where="n").host == "10.1.2.3"


def test_other_schemes_are_refused():
    """Only http and https are channel URLs."""
    with pytest.raises(ConfigError, match="expected an http"):
        check_url("ftp://127.0.0.1/x", allow_plain_http=True, where="n")


@pytest.mark.parametrize(
    ("floor", "priority", "passes"),
    [
        ("high", "critical", True),
        ("high", "high", True),
        ("high", "medium", False),
        ("low", "low", True),
        ("critical", "high", False),
    ],
)
def test_priority_floor(floor, priority, passes):
    """min_priority lets through that priority and more urgent ones (critical first)."""
    assert priority_passes(floor, priority) is passes


def _event(kind: str, priority: str = "high") -> AlarmEvent:
    return AlarmEvent(alarm="a", kind=kind, time=0.0, priority=priority, id=1, key="s/1")


def test_alertmanager_takes_only_opening_and_closing_kinds():
    """Alertmanager gets raised/realarm/cleared/shelved...; an acknowledgement is not sent."""
    cfg = Channel(name="am", alertmanager="http://127.0.0.1:9093")
    assert wants(cfg, _event("raised")) and wants(cfg, _event("cleared"))
    assert not wants(cfg, _event("acknowledged"))


def test_webhook_takes_every_kind():
    """A webhook receives acknowledgements and shelving too."""
    cfg = Channel(name="hook", webhook="http://127.0.0.1:1/")
    assert wants(cfg, _event("acknowledged")) and wants(cfg, _event("unshelved"))


def test_iso_utc():
    """Epoch 0 is 1970-01-01T00:00:00Z (POSIX time, from memory)."""
    assert iso_utc(0.0) == "1970-01-01T00:00:00.000Z"


def test_build_channel_picks_the_implementation():
    """webhook -> WebhookChannel, alertmanager -> AlertmanagerChannel."""
    assert isinstance(build_channel(Channel(name="a", webhook="http://[::1]:1/")), WebhookChannel)
    am = build_channel(Channel(name="b", alertmanager="http://127.0.0.1:9093/"))
    assert isinstance(am, AlertmanagerChannel)
    assert str(am.url) == "http://127.0.0.1:9093/api/v2/alerts"


def test_build_channel_needs_exactly_one_target():
    """A channel with neither or both targets is a config error."""
    with pytest.raises(ConfigError, match="exactly one"):
        build_channel(Channel(name="a"))
    with pytest.raises(ConfigError, match="exactly one"):
        build_channel(Channel(name="a", webhook="https://x.invalid/", alertmanager="https://y/"))


def test_alertmanager_url_follows_the_same_policy():
    """A remote Alertmanager over plain http is refused unless allowed."""
    with pytest.raises(ConfigError, match="allow_plain_http"):
        build_channel(Channel(name="am", alertmanager="http://am.example.invalid:9093"))


def test_safe_url_hides_path_and_query():
    """Logged URLs keep scheme, host and port only (a webhook path often holds a token)."""
    from yarl import URL

    from edge.notify.http import safe_url

    url = URL("https://hooks.example.invalid:8443/services/T0/B0/XXXX?token=abc")
    assert safe_url(url) == "https://hooks.example.invalid:8443/..."
