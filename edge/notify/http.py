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
from edge.errors import DeliveryFailed

__all__ = ["HttpClient", "safe_url"]


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


def safe_url(url: URL) -> str:
    """The URL without path and query, for logs (a webhook path often holds a token)."""
    return str(url.with_path("/").with_query(None).with_fragment(None)).rstrip("/") + "/..."


class HttpClient:
    """One aiohttp session per channel, opened on first use, closed by ``aclose``."""

    def __init__(self, channel: str, cfg: config.Channel) -> None:
        self.channel = channel
        self.timeout = cfg.timeout
        self._session: aiohttp.ClientSession | None = None

    async def post_json(self, url: URL, body: bytes, headers: dict[str, str]) -> None:
        """POST ``body``; raise DeliveryFailed unless the answer is 2xx."""
        if self._session is None or self._session.closed:
            self._session = aiohttp.ClientSession(timeout=aiohttp.ClientTimeout(total=self.timeout))
        tls: ssl.SSLContext | bool = _tls() if url.scheme == "https" else False
        name = self.channel
        try:
            async with self._session.post(
                url, data=body, headers=headers, ssl=tls, allow_redirects=False
            ) as resp:
                if 200 <= resp.status < 300:
                    await resp.read()
                    return
                text = (await resp.text(errors="replace"))[:200].strip()
                raise DeliveryFailed(
                    name,
                    text or resp.reason or "refused",
                    status=resp.status,
                    retry_after=_retry_after(resp.headers.get("Retry-After")),
                )
        except aiohttp.ClientConnectorCertificateError as exc:
            raise DeliveryFailed(name, f"TLS certificate refused: {exc.certificate_error}") from exc
        except aiohttp.ClientConnectorError as exc:
            reason = exc.strerror or exc.os_error or exc
            raise DeliveryFailed(
                name, f"cannot connect to {url.host}:{url.port}: {reason}"
            ) from exc
        except aiohttp.ClientError as exc:
            text = str(exc).replace(str(url), safe_url(url))
            raise DeliveryFailed(name, f"{type(exc).__name__}: {text}") from exc
        except TimeoutError as exc:
            raise DeliveryFailed(name, f"no answer within {self.timeout:g} s") from exc

    async def aclose(self) -> None:
        if self._session is not None:
            await self._session.close()
            self._session = None
