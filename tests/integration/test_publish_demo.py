"""``steam-edge demo --publish URL`` as a newcomer runs it: the simulated plant reaches a
real mosquitto, where any MQTT client can watch it."""

from __future__ import annotations

import asyncio
import json
import os
import subprocess
import sys

import pytest

from tests.integration.mosquitto_server import USERS, Broker
from tests.integration.simkit import free_port
from tests.integration.test_publish_mqtt import Watcher
from tests.support import until

pytestmark = [pytest.mark.slow, pytest.mark.asyncio]


async def test_demo_publishes_the_plant(tmp_path):
    """Every demo point arrives as JSON under steam-edge/kestrel-mill-dyeworks/points/, the
    banner says where to subscribe, the demo exits 0."""
    with Broker(tmp_path / "broker") as broker:
        async with Watcher(broker) as w:
            env = dict(os.environ, TMPDIR=str(tmp_path), STEAMEDGE_MQTT_PASSWORD=USERS["edge"])
            args = [
                "--duration",
                "8",
                "--listen",
                f"127.0.0.1:{free_port()}",
                "--publish",
                broker.url,
                "--publish-user",
                "edge",
            ]
            proc = subprocess.Popen(
                [sys.executable, "-m", "edge", "demo", *args],
                env=env,
                stdout=subprocess.PIPE,
                stderr=subprocess.STDOUT,
            )
            try:
                prefix = "steam-edge/kestrel-mill-dyeworks/points/"
                await until(lambda: len({t for t, _ in w.on(prefix)}) >= 6, 40)
                out, _ = await asyncio.to_thread(proc.communicate, timeout=40)
            finally:
                if proc.poll() is None:
                    proc.kill()
                    proc.wait()
    assert proc.returncode == 0
    text = out.decode(errors="replace")
    assert (
        f"publish    {broker.url} (json)" in text and "steam-edge/kestrel-mill-dyeworks/#" in text
    )
    names = {json.loads(p)["name"] for _, p in w.on(prefix)}
    assert {"drum", "superheater", "header", "feedwater", "condenser"} <= names
