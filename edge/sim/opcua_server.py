"""The boiler-house gateway of the simulated plant, served over OPC UA on loopback.

Every value carries a status code and a source timestamp (the simulated instrument's time
of reading, in UTC). Until the first reading arrives a node reports
``BadWaitingForInitialData``; a node left out of an update keeps its old value *and* its
old source timestamp, which is what a frozen instrument looks like from outside.
Security policy None only: this is a loopback stand-in for a plant, not a hardened server.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass

from asyncua import Server, ua

from edge.errors import EdgeError

__all__ = ["NAMESPACE", "NODES", "Node", "OpcUaPlantServer"]

NAMESPACE = "urn:kestrel-mill-dyeworks:boiler-house"  # registered first: index 2


@dataclass(frozen=True, slots=True)
class Node:
    reading: str  # field of edge.sim.plant.Readings
    node_id: str  # string identifier in NAMESPACE
    variant: str = "Double"  # OPC UA built-in type of the value


NODES: tuple[Node, ...] = (
    Node("hdr_p", "Header.Pressure"),  # barg
    Node("hdr_t", "Header.Temperature", "Float"),  # degC
    Node("drum_p_b", "Drum.PressureB"),  # bar absolute (gauge when mis-set)
    Node("baro", "Site.Barometer"),  # hPa absolute
)


def _utc(t: float) -> dt.datetime:
    return dt.datetime.fromtimestamp(t, tz=dt.UTC)


class OpcUaPlantServer:
    """An OPC UA server with one variable per gateway instrument."""

    def __init__(self, host: str, port: int) -> None:
        self.host, self.port = host, port
        self.endpoint = f"opc.tcp://{host}:{port}/boiler-house"
        self.namespace_index = 2
        self._server: Server | None = None
        self._nodes: dict[str, tuple[ua.NodeId, ua.VariantType]] = {}

    async def start(self) -> None:
        server = Server()
        await server.init()
        server.set_endpoint(self.endpoint)
        server.set_server_name("Kestrel Mill boiler house gateway (simulated)")
        server.set_security_policy([ua.SecurityPolicyType.NoSecurity])
        idx = await server.register_namespace(NAMESPACE)
        self.namespace_index = idx
        folder = await server.nodes.objects.add_object(ua.NodeId("BoilerHouse", idx), "BoilerHouse")
        waiting = ua.StatusCode(ua.StatusCodes.BadWaitingForInitialData)
        for node in NODES:
            vtype = getattr(ua.VariantType, node.variant)
            var = await folder.add_variable(
                ua.NodeId(node.node_id, idx), node.node_id, ua.Variant(0.0, vtype)
            )
            await server.write_attribute_value(
                var.nodeid, ua.DataValue(ua.Variant(0.0, vtype), StatusCode=waiting)
            )
            self._nodes[node.reading] = (var.nodeid, vtype)
        try:
            await server.start()
        except OSError as exc:
            raise EdgeError(
                f"simulator: cannot serve OPC UA on {self.host}:{self.port} "
                f"(port in use or address not available: {exc.strerror})"
            ) from exc
        self._server = server

    @property
    def up(self) -> bool:
        return self._server is not None

    async def stop(self) -> None:
        if self._server is not None:
            server, self._server = self._server, None
            await server.stop()

    async def update(
        self,
        readings: Mapping[str, float],
        source_time: float,
        *,
        status: Mapping[str, str] | None = None,
    ) -> None:
        """Publish readings taken at ``source_time`` (epoch seconds). ``status`` names an
        OPC UA status code per reading (default Good); a reading left out is not touched."""
        if self._server is None:
            return
        when = _utc(source_time)
        now = dt.datetime.now(dt.UTC)
        for reading, value in readings.items():
            if reading not in self._nodes:
                continue
            node_id, vtype = self._nodes[reading]
            code = getattr(ua.StatusCodes, (status or {}).get(reading, "Good"))
            dv = ua.DataValue(
                ua.Variant(float(value), vtype),
                StatusCode=ua.StatusCode(code),
                SourceTimestamp=when,
                ServerTimestamp=now,
            )
            await self._server.write_attribute_value(node_id, dv)
