"""Runs the plant model in (accelerated) real time and serves it over Modbus TCP and OPC UA,
with a small HTTP control endpoint on loopback to switch scenarios while it runs.

Control endpoint (JSON):

- ``GET /scenario``: the scenario running, since when, and every scenario with its summary
- ``PUT /scenario`` (or POST) with ``{"name": "link-drop"}``: switch; 400 for an unknown name
- ``GET /state``: simulated time, link state, the instruments' readings and the true plant

The model advances in fixed steps of simulated time, so a run is reproducible for a seed;
``speed`` runs simulated time faster than the wall clock (tests use it).
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
import time
from dataclasses import asdict, dataclass
from typing import Any

from aiohttp import web

from edge.errors import EdgeError
from edge.sim import scenarios
from edge.sim.modbus_server import ModbusPlantServer
from edge.sim.opcua_server import OpcUaPlantServer
from edge.sim.plant import Plant
from edge.sim.scenarios import Scenario

__all__ = ["SimSettings", "Simulator"]

log = logging.getLogger("edge.sim")


@dataclass(frozen=True, slots=True, kw_only=True)
class SimSettings:
    host: str = "127.0.0.1"
    modbus_port: int = 15020
    opcua_port: int = 14840
    control_port: int | None = 15081  # None: no control endpoint
    unit_id: int = 1
    seed: int = 0
    scenario: str = scenarios.DEFAULT
    speed: float = 1.0  # simulated seconds per wall-clock second
    step: float = 0.1  # simulated seconds per model step
    publish: float = 0.2  # wall-clock seconds between two publications to the servers

    @property
    def control_url(self) -> str | None:
        if self.control_port is None:
            return None
        return f"http://{self.host}:{self.control_port}"


class Simulator:
    """The plant model plus its servers. ``async with Simulator(settings):`` runs it."""

    def __init__(self, settings: SimSettings | None = None) -> None:
        self.settings = s = settings or SimSettings()
        if s.speed <= 0:
            raise EdgeError(f"simulator: speed must be above zero, got {s.speed}")
        self.plant = Plant(seed=s.seed, scenario=s.scenario)
        self.modbus = ModbusPlantServer(s.host, s.modbus_port, unit_id=s.unit_id)
        self.opcua = OpcUaPlantServer(s.host, s.opcua_port)
        self.scenario_since = time.monotonic()
        self.link_is_up = True
        self.published = 0
        self._barometer_sent = False  # a frozen barometer still gave one reading first
        self._task: asyncio.Task[None] | None = None
        self._runner: web.AppRunner | None = None

    @property
    def scenario(self) -> Scenario:
        return self.plant.scenario

    def set_scenario(self, name: str) -> Scenario:
        """Switch scenario now (``KeyError`` for an unknown name)."""
        scenario = self.plant.set_scenario(name)
        self.scenario_since = time.monotonic()
        log.info("scenario %s: %s", scenario.name, scenario.summary)
        return scenario

    async def start(self) -> None:
        # the plant runs from now on; a server publishes once it is up (the OPC UA one
        # takes a couple of seconds to build its address space)
        self._task = asyncio.create_task(self._tick(), name="sim-tick")
        try:
            await self.modbus.start()
            await self.opcua.start()
            await self._publish()
            if self.settings.control_port is not None:
                await self._start_control()
        except BaseException:
            await self.stop()
            raise

    async def stop(self) -> None:
        if self._task is not None:
            self._task.cancel()
            with contextlib.suppress(asyncio.CancelledError):
                await self._task
            self._task = None
        if self._runner is not None:
            await self._runner.cleanup()
            self._runner = None
        await self.modbus.stop()
        await self.opcua.stop()

    async def __aenter__(self) -> Simulator:
        await self.start()
        return self

    async def __aexit__(self, *exc: object) -> None:
        await self.stop()

    async def _tick(self) -> None:
        s = self.settings
        loop = asyncio.get_running_loop()
        last = loop.time()
        owed = 0.0
        max_steps = max(int(60.0 / s.step), 1)  # never replay more than a minute at once
        while True:
            await asyncio.sleep(s.publish)
            now = loop.time()
            owed += (now - last) * s.speed
            last = now
            steps = min(int(owed / s.step + 1e-9), max_steps)
            for _ in range(steps):
                self.plant.step(s.step)
            owed = min(owed - steps * s.step, s.step)
            try:
                await self._publish()
            except Exception:  # a server hiccup must not stop the plant
                log.exception("simulator: publication failed")

    async def _publish(self) -> None:
        scenario = self.plant.scenario
        up = scenarios.link_up(scenario, time.monotonic() - self.scenario_since)
        if up != self.link_is_up:
            log.info("boiler PLC link %s", "restored" if up else "dropped")
            await self.modbus.link(up)
            self.link_is_up = up
        readings = self.plant.readings.as_dict()
        await self.modbus.update(readings)
        if scenario.barometer_frozen and self._barometer_sent:
            readings.pop("baro")  # frozen: the node keeps its last value and timestamp
        await self.opcua.update(readings, time.time())
        self._barometer_sent = self._barometer_sent or (self.opcua.up and "baro" in readings)
        self.published += 1

    def status(self) -> dict[str, Any]:
        sc = self.plant.scenario
        return {
            "scenario": sc.name,
            "summary": sc.summary,
            "since_seconds": round(time.monotonic() - self.scenario_since, 3),
            "scenarios": {name: x.summary for name, x in scenarios.SCENARIOS.items()},
        }

    def snapshot(self) -> dict[str, Any]:
        st = self.plant.state
        return {
            "t": st.t,
            "scenario": self.plant.scenario.name,
            "speed": self.settings.speed,
            "link_up": self.link_is_up,
            "readings": self.plant.readings.as_dict(),
            "plant": asdict(st) | {"barometer": self.plant.barometer()},
        }

    # -- control endpoint -----------------------------------------------------------------

    async def _start_control(self) -> None:
        app = web.Application()
        app.router.add_get("/scenario", self._get_scenario)
        app.router.add_put("/scenario", self._put_scenario)
        app.router.add_post("/scenario", self._put_scenario)
        app.router.add_get("/state", self._get_state)
        self._runner = web.AppRunner(app, access_log=None)
        await self._runner.setup()
        site = web.TCPSite(self._runner, self.settings.host, self.settings.control_port)
        try:
            await site.start()
        except OSError as exc:
            raise EdgeError(
                f"simulator: cannot serve the control endpoint on "
                f"{self.settings.host}:{self.settings.control_port}: {exc.strerror}"
            ) from exc

    async def _get_scenario(self, request: web.Request) -> web.Response:
        return web.json_response(self.status())

    async def _put_scenario(self, request: web.Request) -> web.Response:
        try:
            body = await request.json()
            name = body["name"]
        except (ValueError, KeyError, TypeError):
            return web.json_response(
                {"error": "bad request", "detail": 'expected a JSON body {"name": "<scenario>"}'},
                status=400,
            )
        try:
            self.set_scenario(str(name))
        except KeyError as exc:
            return web.json_response(
                {"error": "unknown scenario", "detail": exc.args[0]}, status=400
            )
        return web.json_response(self.status())

    async def _get_state(self, request: web.Request) -> web.Response:
        return web.json_response(self.snapshot())
