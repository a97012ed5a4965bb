"""A real webhook receiver for tests: an aiohttp server on 127.0.0.1 that checks the
signature, deduplicates by event key, and can be down (port reserved, connections
refused) or flaky (every other request answers 500 after reading the body)."""

from __future__ import annotations

import json
import socket
from collections import Counter

from aiohttp import web

from edge.notify import verify_signature


class Receiver:
    def __init__(self, secret: str | None, *, flaky: bool = False) -> None:
        self.secret = secret
        self.flaky = flaky
        self.requests = 0
        self.answered_500 = 0
        self.bad_signatures = 0
        self.seen: Counter[str] = Counter()  # every key in every request received
        self.accepted: list[str] = []  # keys in requests answered 200, deduplicated
        self.messages: list[dict] = []  # bodies of accepted requests
        self.headers: list[dict[str, str]] = []
        # Bound but not listening: connections are refused until start().
        self.sock = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
        self.sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        self.sock.bind(("127.0.0.1", 0))
        self.port: int = self.sock.getsockname()[1]
        self.url = f"http://127.0.0.1:{self.port}/hook"
        self._runner: web.AppRunner | None = None

    @property
    def duplicates(self) -> int:
        return sum(n - 1 for n in self.seen.values())

    async def _hook(self, request: web.Request) -> web.Response:
        body = await request.read()
        self.requests += 1
        self.headers.append(dict(request.headers))
        if self.secret is not None and not verify_signature(
            self.secret,
            request.headers.get("X-SteamEdge-Timestamp", ""),
            body,
            request.headers.get("X-SteamEdge-Signature", ""),
        ):
            self.bad_signatures += 1
            return web.json_response({"error": "bad signature"}, status=401)
        doc = json.loads(body)
        keys = [e["key"] for e in doc["events"]]
        self.seen.update(keys)
        if self.flaky and self.requests % 2 == 1:
            self.answered_500 += 1
            return web.json_response({"error": "flaky"}, status=500)
        new = [k for k in keys if k not in self.accepted]  # deduplicate by key
        self.accepted.extend(new)
        self.messages.append(doc)
        return web.json_response({"ok": True, "new": len(new)})

    async def start(self) -> None:
        app = web.Application()
        app.router.add_post("/hook", self._hook)
        self._runner = web.AppRunner(app, access_log=None)
        await self._runner.setup()
        self.sock.listen(64)
        await web.SockSite(self._runner, self.sock).start()

    async def stop(self) -> None:
        if self._runner is not None:
            await self._runner.cleanup()
            self._runner = None
        self.sock.close()
