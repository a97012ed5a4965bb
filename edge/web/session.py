"""Sign-in for the operator page: the API token, given once, buys an HttpOnly,
SameSite=Strict session cookie and a CSRF token the page sends back in ``X-CSRF-Token``
on every write. Sessions live in memory (a restart signs everyone out) and end after
``LIFETIME`` or when the API token changes (a reload with a new token)."""

from __future__ import annotations

import hashlib
import hmac
import secrets
import time
from dataclasses import dataclass

from aiohttp import web

__all__ = ["COOKIE", "CSRF_HEADER", "SESSIONS", "Session", "Sessions"]

COOKIE = "steamedge_session"
CSRF_HEADER = "X-CSRF-Token"
LIFETIME = 12 * 3600.0  # s: one shift and a half
MAX_SESSIONS = 200


@dataclass(frozen=True, slots=True)
class Session:
    id: str
    csrf: str
    user: str
    token_hash: bytes
    expires: float


def _hash(token: str) -> bytes:
    return hashlib.sha256(token.encode()).digest()


class Sessions:
    def __init__(self, clock: object = time.monotonic) -> None:
        self._clock = clock
        self._by_id: dict[str, Session] = {}

    def create(self, user: str, token: str) -> Session:
        now = self._clock()  # type: ignore[operator]
        self._by_id = {k: s for k, s in self._by_id.items() if s.expires > now}
        while len(self._by_id) >= MAX_SESSIONS:
            self._by_id.pop(next(iter(self._by_id)))
        s = Session(
            secrets.token_urlsafe(32),
            secrets.token_urlsafe(24),
            user,
            _hash(token),
            now + LIFETIME,
        )
        self._by_id[s.id] = s
        return s

    def get(self, request: web.Request, token: str | None) -> Session | None:
        """The request's live session (cookie known, not expired, same API token)."""
        sid = request.cookies.get(COOKIE)
        if not sid or token is None:
            return None
        s = self._by_id.get(sid)
        if s is None:
            return None
        if s.expires <= self._clock() or not hmac.compare_digest(s.token_hash, _hash(token)):  # type: ignore[operator]
            self._by_id.pop(sid, None)
            return None
        return s

    def end(self, session: Session) -> None:
        self._by_id.pop(session.id, None)

    def check_write(self, request: web.Request, token: str | None) -> str | None:
        """None when the request carries a live session and its CSRF token; otherwise
        the reason it does not ("no_session" or "csrf_mismatch")."""
        s = self.get(request, token)
        if s is None:
            return "no_session"
        given = request.headers.get(CSRF_HEADER, "")
        if not given or not hmac.compare_digest(given.encode(), s.csrf.encode()):
            return "csrf_mismatch"
        return None


SESSIONS: web.AppKey[Sessions] = web.AppKey("sessions", Sessions)
