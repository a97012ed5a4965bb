"""The HTTP side of the service: where it listens, the API token and the rule that goes
with it (no token, no listening off this machine), and starting the aiohttp server."""

from __future__ import annotations

from typing import TYPE_CHECKING

from edge.config import Config, parse_listen, read_secret
from edge.config.rules import is_loopback
from edge.errors import ConfigError, ConfigProblem

if TYPE_CHECKING:
    from aiohttp.web import AppRunner

    from edge.web.port import MonitorPort

__all__ = ["listen_address", "read_token", "start_http"]


def listen_address(config: Config) -> tuple[str, int]:
    """(host, port) of http.listen; port 0 picks a free one."""
    try:
        return parse_listen(config.http.listen)
    except ValueError as exc:
        raise ConfigError([ConfigProblem("http.listen", str(exc))]) from exc


def read_token(config: Config) -> str | None:
    """The API token from http.token_env / token_file. Listening anywhere but loopback
    without one is refused: the API would otherwise be readable by the whole network and
    its writes would be disabled anyway."""
    token = read_secret(config.http.token_env, config.http.token_file, key="http.token")
    host, _ = listen_address(config)
    if token is None and not is_loopback(host):
        raise ConfigError(
            [
                ConfigProblem(
                    "http.listen",
                    f"refusing to listen on {host} without an API token: set http.token_env "
                    "or http.token_file, or listen on 127.0.0.1",
                )
            ]
        )
    return token


async def start_http(monitor: MonitorPort, config: Config) -> tuple[AppRunner, str]:
    """Serve the web app on http.listen; returns the aiohttp runner and the base URL."""
    from aiohttp import web

    from edge.web.app import build_app
    from edge.web.server import make_runner

    host, port = listen_address(config)
    runner = make_runner(build_app(monitor))
    await runner.setup()
    site = web.TCPSite(runner, host, port, reuse_address=True)
    try:
        await site.start()
    except OSError as exc:
        await runner.cleanup()
        reason = exc.strerror or str(exc)
        raise ConfigError(
            [ConfigProblem("http.listen", f"cannot listen on {host}:{port}: {reason}")]
        ) from exc
    bound = runner.addresses[0]
    shown = f"[{bound[0]}]" if ":" in bound[0] else bound[0]
    return runner, f"http://{shown}:{bound[1]}"
