"""Opening and closing one asyncua client, and the boundary where asyncua and socket
errors become ``edge.errors``. Shared by the OPC UA source and ``steam-edge probe``."""

from __future__ import annotations

import asyncio
import contextlib
import logging
from collections.abc import Awaitable, Callable

from asyncua import Client, ua

from edge.config import OpcUaSource
from edge.errors import SecurityError, SourceError, SourceTimeout
from edge.sources.opcua_security import apply_security
from edge.sources.opcua_values import status_name

__all__ = ["close_client", "open_client", "translate"]

# Status codes that mean the server refused who we are, not that it is unwell.
_USER_REFUSED = {"BadUserAccessDenied", "BadIdentityTokenInvalid", "BadIdentityTokenRejected"}
_CHANNEL_REFUSED_PREFIXES = ("BadCertificate", "BadSecurity", "BadNoValidCertificates")
SESSION_TIMEOUT_MS = 60_000  # a session orphaned by a dropped link lasts this long on the server


class _WithholdIdentity(logging.Filter):
    """asyncua logs every request it sends at debug level, ActivateSession included, whose
    user token carries the password (in clear inside an encrypted channel). Keep the line,
    drop the request body."""

    def filter(self, record: logging.LogRecord) -> bool:
        args = record.args if isinstance(record.args, tuple) else (record.args,)
        if any(
            isinstance(a, ua.ActivateSessionRequest | ua.ActivateSessionParameters) for a in args
        ):
            record.msg, record.args = (
                "Sending: ActivateSessionRequest (identity token withheld)",
                (),
            )
        return True


logging.getLogger("asyncua.client.ua_client.UASocketProtocol").addFilter(_WithholdIdentity())


def translate(
    exc: BaseException, source: str, timeout: float | None = None, *, anonymous: bool = False
) -> SourceError:
    """Map an asyncua, socket or timeout error to the package's error tree. ``anonymous``:
    the session was opened without a user name (a refused identity then says so)."""
    if isinstance(exc, SourceError):
        return exc
    if isinstance(exc, TimeoutError | asyncio.TimeoutError):
        within = f" within {timeout:g} s" if timeout else ""
        return SourceTimeout(f"no answer from the server{within}", source=source)
    if isinstance(exc, ua.UaStatusCodeError):
        name = status_name(int(exc.code))
        if name in _USER_REFUSED and anonymous:
            return SecurityError(
                f"server refused an anonymous session ({name}); give a username and "
                "password_env or password_file",
                source=source,
            )
        if name in _USER_REFUSED:
            return SecurityError(
                f"server refused the user name or password ({name})", source=source
            )
        if name.startswith(_CHANNEL_REFUSED_PREFIXES):
            return SecurityError(f"server refused the secure channel ({name})", source=source)
        return SourceError(f"server answered {name}", source=source, kind="status")
    if isinstance(exc, ConnectionRefusedError):
        return SourceError("connection refused", source=source, kind="refused")
    if isinstance(exc, ConnectionError | OSError | EOFError):
        detail = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
        return SourceError(f"connection failed: {detail}", source=source, kind="connection")
    if isinstance(exc, ua.UaError):
        if "certificate mismatch" in str(exc).lower():
            return SecurityError(
                "server certificate changed between discovery and session", source=source
            )
        return SourceError(f"protocol error: {exc}", source=source, kind="protocol")
    return SourceError(f"{type(exc).__name__}: {exc}", source=source, kind="internal")


async def open_client(
    src: OpcUaSource,
    *,
    on_lost: Callable[[Exception], Awaitable[None]] | None = None,
) -> Client:
    """A connected client for ``src`` (security, user, session), or a translated error.
    Bounded: a server that accepts the socket but never answers fails after a few
    timeouts. The library's own reconnect stays off: the caller owns the life cycle."""
    # The supervisor's own probe is pushed far out: the caller runs the keep-alive watchdog.
    # A closed socket still reaches ``on_lost`` at once through the state change.
    client = Client(
        src.endpoint,
        timeout=src.timeout,
        watchdog_intervall=max(30.0, 10 * src.watchdog),
        auto_reconnect=False,
    )
    client.name = client.description = f"steam-edge {src.name}"
    client.product_uri = "urn:steam-edge"
    client.session_timeout = SESSION_TIMEOUT_MS
    client.connection_lost_callback = on_lost
    bound = 6 * src.timeout + 1.0
    try:
        await asyncio.wait_for(apply_security(client, src), bound)
        await asyncio.wait_for(client.connect(), bound)
    except BaseException as exc:
        # Nothing runs yet on a client whose connect failed: dropping the socket is enough.
        with contextlib.suppress(Exception):
            client.disconnect_socket()
        if isinstance(exc, Exception):
            raise translate(exc, src.name, src.timeout, anonymous=not src.username) from exc
        raise
    return client


async def close_client(client: Client, timeout: float = 1.0) -> None:
    """Close politely if the server answers within ``timeout``, then drop the socket."""
    with contextlib.suppress(Exception, asyncio.TimeoutError):
        await asyncio.wait_for(client.disconnect(), timeout)
    with contextlib.suppress(Exception):
        client.disconnect_socket()
