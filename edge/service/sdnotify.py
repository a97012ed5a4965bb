"""The systemd notification protocol, without a systemd library.

A service of ``Type=notify`` sends newline-separated ``KEY=VALUE`` lines as one datagram to
the Unix socket named in ``NOTIFY_SOCKET`` (a leading ``@`` means an abstract socket).
``WATCHDOG_USEC`` (and ``WATCHDOG_PID``, when set, must be our pid) asks for a
``WATCHDOG=1`` at least that often; we ping at half of it. Without ``NOTIFY_SOCKET`` every
call does nothing, so the same code runs under systemd, Docker and a terminal.
"""

from __future__ import annotations

import os
import socket
from collections.abc import Mapping

__all__ = ["Notifier"]


class Notifier:
    """Send sd_notify messages; a no-op when the service manager did not ask for them."""

    def __init__(self, address: str | None, watchdog_usec: int | None = None) -> None:
        self._address: str | None = None
        if address:
            # "@name" is an abstract socket: its real name starts with a NUL byte
            self._address = "\0" + address[1:] if address.startswith("@") else address
        self._sock: socket.socket | None = None
        self.watchdog_usec = watchdog_usec if watchdog_usec and watchdog_usec > 0 else None

    @classmethod
    def from_env(cls, env: Mapping[str, str] | None = None) -> Notifier:
        env = os.environ if env is None else env
        usec: int | None = None
        pid = env.get("WATCHDOG_PID", "")
        if env.get("WATCHDOG_USEC") and (not pid or pid == str(os.getpid())):
            try:
                usec = int(env["WATCHDOG_USEC"])
            except ValueError:
                usec = None
        return cls(env.get("NOTIFY_SOCKET") or None, usec)

    @property
    def enabled(self) -> bool:
        return self._address is not None

    @property
    def watchdog_interval(self) -> float | None:
        """Seconds between two WATCHDOG=1 pings (half the manager's timeout), or None."""
        if not self.enabled or self.watchdog_usec is None:
            return None
        return self.watchdog_usec / 2e6

    def send(self, *lines: str) -> bool:
        """Send the lines as one datagram; False when disabled or the socket is gone."""
        if self._address is None:
            return False
        if self._sock is None:
            self._sock = socket.socket(socket.AF_UNIX, socket.SOCK_DGRAM | socket.SOCK_CLOEXEC)
        try:
            self._sock.sendto("\n".join(lines).encode(), self._address)
        except OSError:
            return False
        return True

    def ready(self, status: str = "") -> bool:
        return self.send("READY=1", *([f"STATUS={status}"] if status else []))

    def watchdog(self) -> bool:
        return self.send("WATCHDOG=1")

    def status(self, text: str) -> bool:
        return self.send(f"STATUS={text}")

    def reloading(self) -> bool:
        return self.send("RELOADING=1")

    def stopping(self, status: str = "") -> bool:
        return self.send("STOPPING=1", *([f"STATUS={status}"] if status else []))

    def close(self) -> None:
        if self._sock is not None:
            self._sock.close()
            self._sock = None
