"""Checks of sources and tags: units and references, scaling, Modbus register space and
overlaps, serial unit ids, OPC UA security, and the start-up warnings about OPC UA
security that ``check`` and ``run`` print. Pure, like ``checks``, and light: no protocol
library is loaded here."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Any
from urllib.parse import urlparse

from edge import units
from edge.config.secrets import check_secret
from edge.config.yaml_lines import Path
from edge.errors import UnitError
from edge.sources.decode import REGISTER_COUNT

if TYPE_CHECKING:
    from edge.config.parts import Parts
    from edge.config.schema import Config, OpcUaSource, Tag

__all__ = [
    "OPCUA_THIS_MACHINE",
    "REGISTER_WIDTH",
    "check_registers",
    "check_source",
    "security_warnings",
    "tag_kind_or_none",
]

REGISTER_WIDTH = REGISTER_COUNT  # registers per value type: decode's table, the one home

Problems = list[tuple[Path, str]]


# --- sources and tags----------------------------------------------------------------


def tag_kind_or_none(tag: Tag) -> str | None:
    try:
        return units.unit_info(tag.unit).kind
    except UnitError:
        return None


def check_source(i: int, s: Any, tags: list[Tag | None], out: Problems) -> None:
    p: Path = ("sources", i)
    if s is not None:
        for key in ("interval", "timeout"):
            if getattr(s, key) <= 0:
                out.append(((*p, key), "must be longer than 0 s"))
        if not tags:
            out.append(((*p, "tags"), "a source needs at least one tag"))
        if s.protocol == "modbus-tcp" and not s.host.strip():
            out.append(((*p, "host"), "the host is empty"))
        if s.protocol == "modbus-rtu":
            if not s.device.strip():
                out.append(((*p, "device"), "the serial device is empty"))
            _rtu_unit(s.unit_id, (*p, "unit_id"), out)
        if s.protocol == "opcua":
            _check_opcua(p, s, out)
    for j, tag in enumerate(tags):
        if tag is None:
            continue
        tp: Path = (*p, "tags", j)
        _check_tag(tp, tag, out)
        if s is not None and tag.stale_after is not None and tag.stale_after > 0:
            _check_stale_after(tp, tag.stale_after, s, out)
        if s is not None and s.protocol == "modbus-rtu" and tag.unit_id is not None:
            _rtu_unit(tag.unit_id, (*tp, "unit_id"), out)


def _check_stale_after(path: Path, stale_after: float, s: Any, out: Problems) -> None:
    """A sample must be able to arrive before it counts as stale: below one interval plus
    the timeout, the tag would flip between good and stale on every poll."""
    if s.interval <= 0 or s.timeout <= 0:
        return
    least = s.interval + s.timeout
    if stale_after < least:
        out.append(
            (
                (*path, "stale_after"),
                f"{stale_after:g} s is shorter than the source's interval + timeout "
                f"({s.interval:g} s + {s.timeout:g} s = {least:g} s): the tag would go stale "
                f"between two polls; give at least {least:g} s",
            )
        )


def _rtu_unit(unit_id: int, path: Path, out: Problems) -> None:
    if unit_id == 0:
        out.append((path, "unit id 0 is the broadcast address on a serial line: nobody answers"))
    elif unit_id > 247:
        out.append((path, f"unit id {unit_id} is outside 1..247 (serial line addresses)"))


def _check_opcua(p: Path, s: Any, out: Problems) -> None:
    if not s.endpoint.startswith("opc.tcp://") or len(s.endpoint) <= len("opc.tcp://"):
        out.append(((*p, "endpoint"), f"expected 'opc.tcp://host:port', got {s.endpoint!r}"))
    sec = s.security
    sp: Path = (*p, "security")
    if (sec.policy == "None") != (sec.mode == "None"):
        out.append(
            (
                (*sp, "mode" if sec.policy != "None" else "policy"),
                f"policy {sec.policy} with mode {sec.mode}: both are None, or neither",
            )
        )
    if sec.policy != "None":
        for key in ("certificate", "private_key"):
            if not getattr(sec, key):
                out.append(((*sp, key), f"policy {sec.policy} needs a client {key}"))
    if sec.server_certificate and sec.trust_dir:
        out.append(((*sp, "trust_dir"), "give server_certificate or trust_dir, not both"))
    has_password = bool(s.password_env or s.password_file)
    if s.username and not has_password:
        out.append(((*p, "username"), "a username needs password_env or password_file"))
    if has_password and not s.username:
        out.append(((*p, "username"), "a password is given but no username"))
    check_secret(p, s, "password", out)


def _check_tag(p: Path, tag: Tag, out: Problems) -> None:
    try:
        info = units.unit_info(tag.unit)
    except UnitError as exc:
        out.append(((*p, "unit"), str(exc)))
        info = None
    if info is not None and info.kind == "pressure":
        if tag.reference is None:
            out.append(
                (
                    (*p, "reference"),
                    "a pressure tag must say absolute, gauge or vacuum (or use a unit such as "
                    "barg/bara); there is no default, because reading gauge as absolute is "
                    "the commonest steam-table mistake",
                )
            )
        elif info.reference is not None and info.reference != tag.reference:
            out.append(
                (
                    (*p, "reference"),
                    f"unit {tag.unit!r} is {info.reference} but reference is {tag.reference}",
                )
            )
    elif info is not None and tag.reference is not None:
        out.append(((*p, "reference"), f"reference is for pressures; {tag.unit!r} is {info.kind}"))
    if tag.scale is not None:
        raw_lo, raw_hi, eng_lo, eng_hi = tag.scale
        if not all(math.isfinite(v) for v in tag.scale):
            out.append(((*p, "scale"), "every number must be finite"))
        elif raw_lo == raw_hi:
            out.append(((*p, "scale"), f"raw low and raw high are both {raw_lo:g}"))
        elif eng_lo == eng_hi:
            out.append(((*p, "scale"), f"engineering low and high are both {eng_lo:g}"))
    if tag.signal == "4-20mA" and tag.scale is None:
        out.append(
            ((*p, "signal"), "a 4-20mA tag needs scale: [raw at 4 mA, raw at 20 mA, eng lo, hi]")
        )
    if tag.valid_range is not None:
        lo, hi = tag.valid_range
        if not (math.isfinite(lo) and math.isfinite(hi)) or lo >= hi:
            out.append(((*p, "valid_range"), "expected [low, high] with low below high"))
    if tag.stale_after is not None and tag.stale_after <= 0:
        out.append(((*p, "stale_after"), "must be longer than 0 s"))
    address = getattr(tag, "address", None)
    if address is not None:
        width = REGISTER_WIDTH[tag.type]
        if address + width - 1 > 65535:
            out.append(
                (
                    (*p, "address"),
                    f"a {tag.type} takes {width} registers ({address}..{address + width - 1}) "
                    "but the last register address is 65535",
                )
            )


def check_registers(parts: Parts, out: Problems) -> None:
    """Modbus tags of one source, unit id and table must not share a register."""
    for i, source in enumerate(parts.sources):
        if source is None or not source.protocol.startswith("modbus"):
            continue
        groups: dict[tuple[int, str], list[tuple[int, int, int, Tag]]] = {}
        for j, tag in enumerate(parts.tags[i]):
            if tag is None:
                continue
            unit = tag.unit_id if tag.unit_id is not None else source.unit_id
            end = tag.address + REGISTER_WIDTH[tag.type] - 1
            groups.setdefault((unit, tag.table), []).append((tag.address, end, j, tag))
        for (unit, table), items in groups.items():
            items.sort(key=lambda x: (x[0], x[2]))
            active: list[tuple[int, int, int, Tag]] = []
            for start, end, j, tag in items:
                active = [a for a in active if a[1] >= start]
                for a in active:
                    later, earlier = (
                        ((j, tag), (a[2], a[3])) if j > a[2] else ((a[2], a[3]), (j, tag))
                    )
                    lt = later[1]
                    lstart, lend = lt.address, lt.address + REGISTER_WIDTH[lt.type] - 1
                    et = earlier[1]
                    estart, eend = et.address, et.address + REGISTER_WIDTH[et.type] - 1
                    out.append(
                        (
                            ("sources", i, "tags", later[0], "address"),
                            f"{table} registers {_span(lstart, lend)} of unit {unit} overlap "
                            f"tag '{et.name}' ({_span(estart, eend)}, sources[{i}].tags"
                            f"[{earlier[0]}])",
                        )
                    )
                active.append((start, end, j, tag))


def _span(a: int, b: int) -> str:
    return str(a) if a == b else f"{a}..{b}"


# --- start-up warnings ----------------------------------------------------------------

# Stricter than edge.config.rules.is_loopback on purpose: any host other than these three
# names (127.0.0.2 included) gets the warning, as the OPC UA security rule asks.
OPCUA_THIS_MACHINE = frozenset({"127.0.0.1", "localhost", "::1"})


def security_warnings(config: Config | OpcUaSource) -> list[str]:
    """Warnings to print at start-up for a whole config (or one OPC UA source): security
    policy None towards anything but this machine sends values, and any user name and
    password, as readable plain text."""
    warnings = []
    for src in getattr(config, "sources", [config]):
        if src.protocol != "opcua":
            continue
        host = (urlparse(src.endpoint).hostname or "").lower()
        if src.security.policy == "None" and host not in OPCUA_THIS_MACHINE:
            warnings.append(
                f"source {src.name}: OPC UA security policy None towards {host or src.endpoint}: "
                "traffic is neither signed nor encrypted; use Basic256Sha256 or stronger with "
                "mode SignAndEncrypt"
            )
    return warnings
