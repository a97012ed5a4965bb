"""The Sparkplug B schema (sparkplug_b.proto beside this file), compiled with grpcio-tools'
protoc into a temporary folder at test time and imported from there."""

from __future__ import annotations

import importlib.util
import sys
import tempfile
from functools import cache
from pathlib import Path
from types import ModuleType

PROTO = Path(__file__).with_name("sparkplug_b.proto")


@cache
def sparkplug_pb2() -> ModuleType:
    """The generated module (``Payload``, ``DataType``); compiled once per test process."""
    from grpc_tools import protoc

    out = Path(tempfile.mkdtemp(prefix="sparkplug-proto-"))
    rc = protoc.main(["protoc", f"--proto_path={PROTO.parent}", f"--python_out={out}", str(PROTO)])
    if rc != 0:
        raise RuntimeError(f"protoc failed on {PROTO} (exit {rc})")
    path = out / "sparkplug_b_pb2.py"
    spec = importlib.util.spec_from_file_location("sparkplug_b_pb2", path)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules["sparkplug_b_pb2"] = module
    spec.loader.exec_module(module)
    return module


def parse(payload: bytes):  # -> Payload
    """Decode a Sparkplug B payload with the specification's schema."""
    msg = sparkplug_pb2().Payload()
    msg.ParseFromString(payload)
    return msg
