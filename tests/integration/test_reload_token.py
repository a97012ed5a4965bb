"""A reload may not drop the API token while the monitor listens beyond loopback (issue 10,
item 9): an in-process monitor on 0.0.0.0, asked over real HTTP."""

from __future__ import annotations

import socket

import pytest

from tests.integration.servicekit import TOKEN, auth, post, running_monitor, write_config

pytestmark = pytest.mark.asyncio


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


async def test_reload_that_drops_the_token_while_listening_on_all_addresses_is_refused(
    tmp_path, monkeypatch
):
    """Listening on 0.0.0.0 with a token, a new config without a token (and listen moved
    to 127.0.0.1, which needs a restart) is refused with 422; the token still guards writes."""
    monkeypatch.setenv("STEAMEDGE_TEST_TOKEN", TOKEN)
    plc = _free_port()
    config = write_config(tmp_path / "edge.yaml", plc, listen="0.0.0.0:0")
    async with running_monitor(config) as m:
        local = "http://127.0.0.1:" + m.url.rsplit(":", 1)[1]
        write_config(tmp_path / "edge.yaml", plc, listen="127.0.0.1:0", token_env=None)
        status, body = await post(local + "/api/v1/reload", headers=auth())
        assert status == 422, body
        assert any("cannot drop the API token" in p for p in body["problems"])
        assert m.token == TOKEN
        status, _ = await post(local + "/api/v1/reload")  # no token: still refused
        assert status == 401
