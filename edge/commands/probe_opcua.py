"""``steam-edge probe opc.tcp://HOST:PORT/path``: commissioning reads, once, read-only.

    --node NODEID       read it: value, type, status code, source and server timestamps
    --browse [--node]   list what lies below Objects (or below each --node), variables with
                        their NodeId, current value and type, to ``--depth`` levels
    --security POLICY[,MODE] --certificate --private-key --server-certificate
    --username --password-env   the same security as a source (the password only ever
                                comes from the environment)

The argument parser lives in ``edge/commands/probe.py``; this module does the work.
"""

from __future__ import annotations

import argparse
import asyncio
from datetime import datetime
from typing import Any

from asyncua import Client, ua

from edge import config as cfg
from edge.errors import ConfigError
from edge.logs import held_back
from edge.sources.opcua_client import close_client, open_client, translate
from edge.sources.opcua_security import MODES, POLICIES, fingerprint
from edge.sources.opcua_values import parse_node_id, status_name

__all__ = ["format_reading", "main", "source_config"]

_OBJECTS = ua.NodeId(ua.ObjectIds.ObjectsFolder)
_NAME_WIDTH = 44


def _policy_and_mode(text: str | None) -> tuple[str, str]:
    if not text:
        return "None", "None"
    policy, _, mode = (part.strip() for part in text.partition(","))
    if policy != "None" and policy not in POLICIES:
        raise ConfigError(
            f"--security: unknown policy {policy!r}; expected None, {', '.join(POLICIES)}"
        )
    if policy == "None":
        mode = mode or "None"
    mode = mode or "SignAndEncrypt"
    if mode not in MODES:
        raise ConfigError(f"--security: unknown mode {mode!r}; expected Sign or SignAndEncrypt")
    return policy, mode


def source_config(args: argparse.Namespace) -> cfg.OpcUaSource:
    """A source config equivalent to the probe's command line (no tags)."""
    policy, mode = _policy_and_mode(getattr(args, "security", None))
    security = {
        "policy": policy,
        "mode": mode,
        "certificate": getattr(args, "certificate", None),
        "private_key": getattr(args, "private_key", None),
        "server_certificate": getattr(args, "server_certificate", None),
    }
    return cfg.OpcUaSource.model_validate(
        {
            "name": "probe",
            "protocol": "opcua",
            "endpoint": args.target,
            "timeout": float(getattr(args, "timeout", 2.0) or 2.0),
            "security": {k: v for k, v in security.items() if v is not None},
            "username": getattr(args, "username", None),
            "password_env": getattr(args, "password_env", None),
            "tags": [],
        }
    )


def _time(ts: datetime | None) -> str:
    return ts.isoformat(timespec="microseconds").replace("+00:00", "Z") if ts else "-"


def _value_and_type(dv: Any) -> tuple[str, str]:
    variant = getattr(dv, "Value", None)
    value = getattr(variant, "Value", None)
    vtype = getattr(getattr(variant, "VariantType", None), "name", "Null")
    if getattr(variant, "is_array", False) or isinstance(value, list):
        vtype = f"{vtype}[]"
    return repr(value) if isinstance(value, str) else str(value), vtype


def format_reading(node: str, dv: Any) -> list[str]:
    """The lines ``probe --node`` prints for one DataValue."""
    code = getattr(getattr(dv, "StatusCode", None), "value", 0) or 0
    value, vtype = _value_and_type(dv)
    return [
        f"{node}",
        f"  value         {value}",
        f"  type          {vtype}",
        f"  status        {status_name(code)} (0x{code:08X})",
        f"  source time   {_time(getattr(dv, 'SourceTimestamp', None))}",
        f"  server time   {_time(getattr(dv, 'ServerTimestamp', None))}",
    ]


async def _read(client: Client, nodes: list[str]) -> bool:
    """Read every node in one request and print them in order; True if all were Good."""
    parsed = [(text, parse_node_id(text)) for text in nodes]
    ids = [nid for _, nid in parsed if nid is not None]
    values = []
    if ids:
        params = ua.ReadParameters(
            MaxAge=0,
            TimestampsToReturn=ua.TimestampsToReturn.Both,
            NodesToRead=[
                ua.ReadValueId(NodeId=nid, AttributeId=ua.AttributeIds.Value) for nid in ids
            ],
        )
        values = list(await client.uaclient.read(params))
    all_good = True
    for text, nid in parsed:
        if nid is None:
            print(f"{text}\n  not a NodeId string (expected e.g. ns=2;s=Boiler.Pressure)")
            all_good = False
            continue
        dv = values.pop(0)
        print("\n".join(format_reading(text, dv)))
        all_good = all_good and (getattr(dv.StatusCode, "value", 0) or 0) == 0
    return all_good


async def _missing(client: Client, node: ua.NodeId) -> str | None:
    """The status name when the server does not know ``node`` (browsing it would list
    nothing and look like an empty folder), else None."""
    try:
        await client.get_node(node).read_browse_name()
    except ua.UaStatusCodeError as exc:
        code = getattr(exc, "code", None)
        return status_name(code) if isinstance(code, int) else type(exc).__name__
    return None


async def _browse(client: Client, root: ua.NodeId, depth: int, indent: int = 0) -> None:
    refs = await client.get_node(root).get_children_descriptions()
    variables = [r for r in refs if r.NodeClass == ua.NodeClass.Variable]
    values: dict[str, Any] = {}
    if variables:
        ids = [ua.NodeId(r.NodeId.Identifier, r.NodeId.NamespaceIndex) for r in variables]
        for r, dv in zip(
            variables, await client.read_attributes([client.get_node(i) for i in ids]), strict=True
        ):
            values[r.NodeId.to_string()] = dv
    pad = "  " * indent
    for r in refs:
        nid = r.NodeId.to_string()
        name = r.BrowseName.Name
        if r.NodeClass == ua.NodeClass.Variable:
            dv = values[nid]
            value, vtype = _value_and_type(dv)
            status = status_name(getattr(dv.StatusCode, "value", 0) or 0)
            print(f"{pad}{nid:<{_NAME_WIDTH}} variable  {name} = {value} ({vtype}, {status})")
        else:
            kind = r.NodeClass.name.lower()
            print(f"{pad}{nid:<{_NAME_WIDTH}} {kind:<9} {name}")
            # namespace 0 holds the standard nodes (the Server object): listed, not expanded
            if depth > 1 and r.NodeId.NamespaceIndex != 0:
                child = ua.NodeId(r.NodeId.Identifier, r.NodeId.NamespaceIndex)
                await _browse(client, child, depth - 1, indent + 1)


async def _probe(args: argparse.Namespace) -> int:
    src = source_config(args)
    nodes: list[str] = list(getattr(args, "node", None) or [])
    client = await open_client(src)
    try:
        return await _work(client, src, args, nodes)
    except Exception as exc:
        raise translate(exc, src.name, src.timeout) from exc
    finally:
        await close_client(client, src.timeout)


async def _work(
    client: Client, src: cfg.OpcUaSource, args: argparse.Namespace, nodes: list[str]
) -> int:
    if src.security.policy != "None":
        peer = getattr(client.security_policy, "peer_certificate", None)
        if peer:
            print(
                f"secure channel: {src.security.policy} {src.security.mode}; "
                f"server certificate SHA-256 {fingerprint(peer)}"
            )
    if getattr(args, "browse", False):
        roots = [parse_node_id(n) for n in nodes] if nodes else [_OBJECTS]
        rc = 0
        for text, root in zip(nodes or ["Objects"], roots, strict=True):
            if root is None:
                print(f"{text}: not a NodeId string (expected e.g. ns=2;s=Boiler.Pressure)")
                rc = 1
                continue
            missing = await _missing(client, root)
            if missing:
                print(f"{text}: no such node on this server ({missing})")
                rc = 1
                continue
            print(f"below {text}:")
            await _browse(client, root, max(1, int(getattr(args, "depth", 1) or 1)), 1)
        return rc
    if not nodes:
        namespaces = await client.get_namespace_array()
        for i, uri in enumerate(namespaces):
            print(f"ns={i}  {uri}")
        print("give --node NODEID to read a node, or --browse to list the address space")
        return 0
    return 0 if await _read(client, nodes) else 1


def main(args: argparse.Namespace) -> int:
    """Run the probe; a refused or failed connection raises an ``EdgeError`` the CLI prints
    as one line."""
    with held_back("asyncua"):
        return asyncio.run(_probe(args))
