"""One JSON POST with the project's HTTP rules, aiohttp errors translated to DeliveryFailed.

https uses the system certificate store (verified); redirects are not followed (a
redirect could lead to plain http); proxies from the environment are not used; the
channel's ``timeout`` bounds the whole request.
"""

from __future__ import annotations

import ssl
from functools import cache

import aiohttp
from yarl import URL

from edge import config
from edge.notify.base import DeliveryFailed

__all__ = ["post_json"]


@cache
def _tls() -> ssl.SSLContext:
    return ssl.create_default_context()


def _retry_after(value: str | None) -> float | None:
    if not value:
        return None
    try:
        return max(0.0, float(value))
    except ValueError:
        return None  # an HTTP date: the backoff decides


async def post_json(
    session: aiohttp.ClientSession | None,
    channel: str,
    url: URL,
    body: bytes,
    headers: dict[str, str],
    cfg: config.Channel,
) -> aiohttp.ClientSession:
    """POST ``body``; return the (possibly new) session; raise DeliveryFailed unless 2xx."""
    if session is None or session.closed:
        session = aiohttp.ClientSession(timeout=aiohttp.ClientTimeout(total=cfg.timeout))
    tls: ssl.SSLContext | bool = _tls() if url.scheme == "https" else False
    try:
        async with session.post(
            url, data=body, headers=headers, ssl=tls, allow_redirects=False
        ) as resp:
            if 200 <= resp.status < 300:
                await resp.read()
                return session
            text = (await resp.text(errors="replace"))[:200].strip()
            raise DeliveryFailed(
                channel,
                text or resp.reason or "refused",
                status=resp.status,
                retry_after=_retry_after(resp.headers.get("Retry-After")),
            )
    except aiohttp.ClientConnectorCertificateError as exc:
        raise DeliveryFailed(channel, f"TLS certificate refused: {exc.certificate_error}") from exc
    except aiohttp.ClientConnectorError as exc:
        raise DeliveryFailed(
            channel, f"cannot connect to {url.host}:{url.port}: {exc.strerror or exc}"
        ) from exc
    except aiohttp.ClientError as exc:
        raise DeliveryFailed(channel, f"{type(exc).__name__}: {exc}") from exc
    except TimeoutError as exc:
        raise DeliveryFailed(channel, f"no answer within {cfg.timeout:g} s") from exc
