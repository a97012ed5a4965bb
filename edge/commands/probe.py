"""``steam-edge probe TARGET``: one-shot commissioning reads. The target's scheme picks the
protocol: modbus-tcp:// and modbus-rtu:// go to ``edge.commands.probe_modbus``, opc.tcp://
to ``edge.commands.probe_opcua``. Read-only: a probe never writes to a device."""

from __future__ import annotations

import argparse
import importlib
import math

from edge.errors import ConfigError

_PROBES = {
    "modbus-tcp": "edge.commands.probe_modbus",
    "modbus-rtu": "edge.commands.probe_modbus",
    "opc.tcp": "edge.commands.probe_opcua",
}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "target",
        help="modbus-tcp://HOST[:PORT], "
        "'modbus-rtu:///dev/ttyUSB0?baudrate=19200&parity=E&stopbits=1&bytesize=8' "
        "or opc.tcp://HOST:PORT[/PATH]",
    )
    parser.add_argument(
        "--timeout", type=float, default=2.0, help="seconds to wait for an answer (default 2)"
    )
    modbus = parser.add_argument_group("Modbus")
    modbus.add_argument("--unit", type=int, default=1, help="unit id (default 1)")
    modbus.add_argument(
        "--table",
        choices=("holding", "input"),
        default="holding",
        help="register table: holding (function code 3) or input (4); default holding",
    )
    modbus.add_argument(
        "--address",
        type=int,
        default=0,
        help="first register, zero-based protocol address (register 40101 is holding 100)",
    )
    modbus.add_argument(
        "--count", type=int, default=2, help="registers to read, 1..125 (default 2)"
    )
    modbus.add_argument(
        "--expect",
        help="the value shown on the local gauge, e.g. 7.2 or '7.2 bar': decodings within "
        "1 %% of it are marked (with a unit: in each common unit of that quantity too)",
    )
    opcua = parser.add_argument_group("OPC UA")
    opcua.add_argument(
        "--node",
        action="append",
        default=[],
        metavar="NODEID",
        help="NodeId to read, e.g. 'ns=2;s=HP.Pressure' (repeatable)",
    )
    opcua.add_argument("--browse", action="store_true", help="list the address space below Objects")
    opcua.add_argument(
        "--depth", type=int, default=1, help="levels to browse with --browse (default 1)"
    )
    opcua.add_argument(
        "--security",
        metavar="POLICY[,MODE]",
        help="security policy and mode, e.g. Basic256Sha256,SignAndEncrypt (default: None)",
    )
    opcua.add_argument("--certificate", metavar="FILE", help="client certificate (DER or PEM)")
    opcua.add_argument("--private-key", metavar="FILE", help="client private key (PEM)")
    opcua.add_argument(
        "--server-certificate", metavar="FILE", help="pin the server's certificate (DER or PEM)"
    )
    opcua.add_argument("--username", help="user name for a user/password login")
    opcua.add_argument(
        "--password-env",
        metavar="VAR",
        help="environment variable holding the password (never on the command line)",
    )


def main(args: argparse.Namespace) -> int:
    scheme = args.target.split("://", 1)[0].lower() if "://" in args.target else ""
    module = _PROBES.get(scheme)
    if module is None:
        raise ConfigError(
            f"probe: cannot tell the protocol of {args.target!r}; "
            "expected modbus-tcp://, modbus-rtu:// or opc.tcp://"
        )
    if not (math.isfinite(args.timeout) and args.timeout > 0):
        raise ConfigError(f"--timeout is in seconds and above 0, got {args.timeout}")
    return int(importlib.import_module(module).main(args))
