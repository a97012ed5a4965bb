"""sd_notify over a real Unix datagram socket the test reads."""

from __future__ import annotations

import os
import socket
import uuid

import pytest

from edge.service.sdnotify import Notifier


@pytest.fixture
def listener(tmp_path):
    sock = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
    path = str(tmp_path / "notify.sock")
    sock.bind(path)
    sock.settimeout(2)
    yield path, sock
    sock.close()


def test_ready_sends_one_datagram_with_status(listener):
    """READY=1 and STATUS= travel together in one datagram."""
    path, sock = listener
    n = Notifier.from_env({"NOTIFY_SOCKET": path})
    assert n.ready("running")
    assert sock.recv(4096) == b"READY=1\nSTATUS=running"
    n.close()


def test_abstract_socket_name_with_at_sign():
    """An '@' address reaches the abstract socket of that name."""
    name = f"steamedge-test-{uuid.uuid4().hex}"
    sock = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM)
    sock.bind("\0" + name)
    sock.settimeout(2)
    try:
        n = Notifier.from_env({"NOTIFY_SOCKET": "@" + name})
        assert n.watchdog()
        assert sock.recv(4096) == b"WATCHDOG=1"
        n.close()
    finally:
        sock.close()


def test_disabled_without_notify_socket():
    """Without NOTIFY_SOCKET nothing is sent and there is no watchdog."""
    n = Notifier.from_env({"WATCHDOG_USEC": "2000000"})
    assert not n.enabled
    assert not n.ready()
    assert n.watchdog_interval is None


def test_watchdog_interval_is_half_the_timeout(listener):
    """WATCHDOG_USEC=3 s asks for a ping every 1.5 s."""
    path, _ = listener
    n = Notifier.from_env({"NOTIFY_SOCKET": path, "WATCHDOG_USEC": "3000000"})
    assert n.watchdog_interval == pytest.approx(1.5)


def test_watchdog_for_another_pid_is_ignored(listener):
    """WATCHDOG_PID naming another process means the watchdog is not ours."""
    path, _ = listener
    env = {"NOTIFY_SOCKET": path, "WATCHDOG_USEC": "3000000", "WATCHDOG_PID": str(os.getpid() + 1)}
    assert Notifier.from_env(env).watchdog_interval is None


def test_stopping_message(listener):
    """STOPPING=1 carries the reason in STATUS=."""
    path, sock = listener
    n = Notifier.from_env({"NOTIFY_SOCKET": path})
    n.stopping("shutting down")
    assert sock.recv(4096) == b"STOPPING=1\nSTATUS=shutting down"
    n.close()


def test_missing_socket_does_not_raise(tmp_path):
    """A socket that went away makes send return False, never raise."""
    n = Notifier.from_env({"NOTIFY_SOCKET": str(tmp_path / "gone.sock")})
    assert n.send("READY=1") is False
