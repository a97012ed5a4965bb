"""OPC UA connection life against a real asyncua server in a child process: killed and
restarted, paused with SIGSTOP and resumed. The source task keeps running throughout."""

from __future__ import annotations

import time

import pytest

from edge import config as cfg
from edge.sources.opcua import OpcUaSource
from tests.integration.opcua_server import ServerProcess, running

pytestmark = [pytest.mark.asyncio(loop_scope="module"), pytest.mark.slow]

INTERVAL = 0.5  # s
BACKOFF_MAX = 2.0  # s
SETUP_MARGIN = 2.0  # s: connection set-up and the first publishing interval, loaded machine
NODE = "ns=2;s=Boiler.DrumPressure"  # the test server's first namespace of its own is 2


@pytest.fixture(scope="module")
def plant():
    proc = ServerProcess()
    proc.start()
    yield proc
    proc.kill()


def source(url: str, mode: str = "subscribe") -> OpcUaSource:
    return OpcUaSource(
        cfg.OpcUaSource.model_validate(
            {
                "name": "turbine-opcua",
                "protocol": "opcua",
                "endpoint": url,
                "mode": mode,
                "interval": f"{INTERVAL} s",
                "backoff_max": f"{BACKOFF_MAX} s",
                "watchdog": "2 s",
                "tags": [{"name": "hp_p", "node": NODE, "unit": "bar", "reference": "gauge"}],
            }
        )
    )


@pytest.mark.parametrize("mode", ["subscribe", "poll"])
async def test_killed_server_goes_comm_loss_and_comes_back_after_restart(plant, mode):
    """Kill: bad/comm_loss within 2 intervals; restart: good again within the backoff cap."""
    src = source(plant.url, mode)
    async with running(src) as rec:
        await rec.wait_for(lambda s: s.quality.good, timeout=10, since=0)
        killed = time.time()
        plant.kill()
        lost = await rec.wait_for(lambda s: s.quality.reason == "comm_loss", timeout=5)
        assert lost.receive_time - killed <= 2 * INTERVAL
        assert lost.last_good == pytest.approx(7.5e5)  # 7.5 bar in Pa; common practice
        assert not src.health.up
        plant.start()  # same port; the source retries meanwhile with capped backoff
        back = time.time()
        again = await rec.wait_for(lambda s: s.quality.good, timeout=BACKOFF_MAX + 10)
        assert again.receive_time - back <= BACKOFF_MAX + SETUP_MARGIN
        assert src.health.up
    assert src.health.errors.get("refused", 0) + src.health.errors.get("connection", 0) >= 1


async def test_paused_server_is_noticed_within_five_seconds(plant):
    """SIGSTOP (socket open, no answers): bad/comm_loss within 5 s; SIGCONT: good again."""
    src = source(plant.url)
    async with running(src) as rec:
        await rec.wait_for(lambda s: s.quality.good, timeout=10, since=0)
        paused = time.time()
        plant.pause()
        try:
            lost = await rec.wait_for(lambda s: s.quality.reason == "comm_loss", timeout=10)
        finally:
            plant.resume()
        assert lost.receive_time - paused <= 5.0
        assert src.health.errors.get("timeout", 0) >= 1
        await rec.wait_for(lambda s: s.quality.good, timeout=BACKOFF_MAX + 10)
