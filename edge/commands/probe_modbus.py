"""``steam-edge probe`` for Modbus: read a few registers once and show every decoding.

    steam-edge probe modbus-tcp://10.0.0.5:502 --unit 1 --table holding --address 100 --count 4
    steam-edge probe "modbus-rtu:///dev/ttyUSB0?baudrate=19200&parity=E" --address 0 --expect 7.2

The raw registers are printed in hex and decimal, then the value under every type at every
offset and in every layout, and with ``--expect`` (the value on the local gauge) the
decodings within 1 % are marked and listed as ready-to-paste tag settings. Integer
decodings that match after a decimal shift (72 -> 7.2) are listed with the scale to use.

Read-only like the source: only function codes 3 and 4 are ever sent.
"""

from __future__ import annotations

import argparse
import asyncio
import math
import sys
from collections.abc import Sequence
from typing import Any
from urllib.parse import parse_qsl, urlsplit

from pydantic import ValidationError

from edge import units
from edge.config import ModbusRtuSource, ModbusTcpSource
from edge.errors import ConfigError, SourceError, UnitError
from edge.logs import held_back
from edge.sources.decode import (
    LAYOUTS_32,
    LAYOUTS_64,
    REGISTER_COUNT,
    TYPES,
    Decoding,
    all_decodings,
)
from edge.sources.modbus_link import Failure
from edge.sources.modbus_tcp import link_for
from edge.sources.plan import MAX_REGISTERS

__all__ = ["format_report", "main", "matches", "parse_target", "read_registers"]

ModbusConfig = ModbusTcpSource | ModbusRtuSource

TOLERANCE = 0.01  # 1 %: a gauge read by eye is no better
_RTU_KEYS = ("baudrate", "parity", "stopbits", "bytesize")
_LAYOUTS = {1: ("AB", "BA"), 2: tuple(LAYOUTS_32), 4: tuple(LAYOUTS_64)}
_SETTINGS = {
    "AB": "",
    "BA": "byte_swap: true",
    "ABCD": "word_order: big",
    "CDAB": "word_order: little",
    "BADC": "word_order: big, byte_swap: true",
    "DCBA": "word_order: little, byte_swap: true",
    "ABCDEFGH": "word_order: big",
    "GHEFCDAB": "word_order: little",
    "BADCFEHG": "word_order: big, byte_swap: true",
    "HGFEDCBA": "word_order: little, byte_swap: true",
}


def parse_target(url: str, *, timeout: float = 2.0) -> ModbusConfig:
    """``modbus-tcp://HOST[:PORT]`` or ``modbus-rtu:///dev/X?baudrate=..&parity=..`` as a
    source configuration without tags. Raises ConfigError with one readable line."""
    parts = urlsplit(url)
    scheme = parts.scheme.lower()
    query = dict(parse_qsl(parts.query, keep_blank_values=True))
    try:
        if scheme == "modbus-tcp":
            if query or parts.path not in ("", "/"):
                raise ConfigError(f"{url}: a modbus-tcp target is modbus-tcp://HOST[:PORT]")
            if not parts.hostname:
                raise ConfigError(f"{url}: no host; write modbus-tcp://HOST[:PORT]")
            return ModbusTcpSource(
                name="probe",
                protocol="modbus-tcp",
                host=parts.hostname,
                port=parts.port or 502,
                timeout=timeout,
                retries=0,
                tags=[],
            )
        if scheme == "modbus-rtu":
            device = (parts.netloc + parts.path) if parts.netloc else parts.path
            unknown = sorted(set(query) - set(_RTU_KEYS))
            if unknown:
                raise ConfigError(
                    f"{url}: unknown setting(s) {', '.join(unknown)}; "
                    f"accepted: {', '.join(_RTU_KEYS)}"
                )
            if not device:
                raise ConfigError(f"{url}: no serial device; e.g. modbus-rtu:///dev/ttyUSB0")
            return ModbusRtuSource(
                name="probe",
                protocol="modbus-rtu",
                device=device,
                timeout=timeout,
                retries=0,
                tags=[],
                **_line_settings(url, query),
            )
    except ValueError as exc:  # pydantic's ValidationError, or a bad port number
        raise ConfigError(f"{url}: {_first_error(exc)}") from exc
    raise ConfigError(f"{url}: expected modbus-tcp://HOST[:PORT] or modbus-rtu:///dev/DEVICE")


def _line_settings(url: str, query: dict[str, str]) -> dict[str, Any]:
    out: dict[str, Any] = {}
    for key, value in query.items():
        if key == "parity":
            out[key] = value.upper()
        elif value.isdigit():
            out[key] = int(value)
        else:
            raise ConfigError(f"{url}: {key} must be a whole number, got {value!r}")
    return out


def _first_error(exc: ValueError) -> str:
    if isinstance(exc, ValidationError):
        err = exc.errors()[0]
        where = ".".join(str(p) for p in err["loc"])
        return f"{where}: {err['msg']}"
    return str(exc)


async def read_registers(
    config: ModbusConfig, table: str, unit: int, address: int, count: int
) -> list[int]:
    """One read of ``count`` registers (function code 3 or 4). Raises SourceError."""
    link = link_for(config)
    failure = await link.connect()
    try:
        if failure is None:
            outcome = await link.read(table, unit, address, count)
            if not isinstance(outcome, Failure):
                return outcome
            failure = outcome
    finally:
        link.close()
    last = address + count - 1
    hint = " (try a smaller --count or another --address)" if failure.code == 2 else ""
    raise SourceError(
        f"unit {unit} {table} {address}..{last}: {failure.message}{hint}", kind=failure.kind
    )


def _close(value: float, expect: float) -> bool:
    if not math.isfinite(value):
        return False
    return abs(value - expect) <= TOLERANCE * abs(expect)


def matches(decodings: Sequence[Decoding], expect: float) -> list[tuple[Decoding, int]]:
    """Decodings within 1 % of ``expect``, each with the decimal shift that gets it there
    (0: as is; 1: divide by 10 ...; shifts only for integer types)."""
    out: list[tuple[Decoding, int]] = []
    for d in decodings:
        shifts = (0, 1, 2, 3) if d.type.endswith(("int16", "int32")) else (0,)
        for shift in shifts:
            if _close(d.value / 10**shift, expect):
                out.append((d, shift))
                break
    return out


def _number(value: float) -> str:
    if isinstance(value, int):
        return str(value)
    if math.isnan(value):
        return "nan"
    return f"{value:.7g}"


def format_report(
    registers: Sequence[int],
    *,
    target: str,
    unit: int,
    table: str,
    address: int,
    expect: float | None = None,
) -> str:
    """The whole report as text (pure)."""
    decodings = all_decodings(registers)
    marked = (
        {(d.offset, d.type, d.layout): shift for d, shift in matches(decodings, expect)}
        if (expect is not None)
        else {}
    )
    last = address + len(registers) - 1
    lines = [f"{target}  unit {unit}  {table} registers {address}..{last}", ""]
    lines.append(f"{'register':>8}  {'hex':>6}  {'unsigned':>8}  {'signed':>6}")
    for i, reg in enumerate(registers):
        signed = reg - 0x10000 if reg & 0x8000 else reg
        lines.append(f"{address + i:>8}  0x{reg:04X}  {reg:>8}  {signed:>6}")
    for width in (1, 2, 4):
        layouts = _LAYOUTS[width]
        types = [t for t in TYPES if REGISTER_COUNT[t] == width]
        if len(registers) < width:
            continue
        lines += ["", f"{'at':>8}  {'type':<8}" + "".join(f"  {name:<16}" for name in layouts)]
        for offset in range(len(registers) - width + 1):
            for type_ in types:
                cells = []
                for layout in layouts:
                    (d,) = [
                        x for x in decodings
                        if (x.offset, x.type, x.layout) == (offset, type_, layout)
                    ]  # fmt: skip
                    shift = marked.get((offset, type_, layout))
                    mark = "" if shift is None else ("*" if shift == 0 else f"*/{10**shift}")
                    cells.append(f"  {(_number(d.value) + ' ' + mark).strip():<16}")
                lines.append(f"{address + offset:>8}  {type_:<8}" + "".join(cells))
    lines += ["", "layouts, as tag settings:"]
    for width, names in _LAYOUTS.items():
        legend = "; ".join(f"{n} ({_SETTINGS[n] or 'as sent'})" for n in names)
        lines.append(f"  {16 * width}-bit: {legend}")
    if expect is not None:
        lines += ["", _summary(decodings, marked, address, expect)]
    return "\n".join(line.rstrip() for line in lines)


def _summary(
    decodings: Sequence[Decoding],
    marked: dict[tuple[int, str, str], int],
    address: int,
    expect: float,
) -> str:
    found = sorted(
        (d for d in decodings if (d.offset, d.type, d.layout) in marked),
        key=lambda d: (marked[(d.offset, d.type, d.layout)], not d.type.startswith("float")),
    )
    if not found:
        return f"no decoding within 1 % of {expect:g}: check the address, table and unit id"
    lines = [f"within 1 % of {expect:g} (* in the table):"]
    for d in found:
        shift = marked[(d.offset, d.type, d.layout)]
        settings = ", ".join(
            x
            for x in (f"address: {address + d.offset}", f"type: {d.type}", _SETTINGS[d.layout])
            if x
        )
        value = d.value / 10**shift
        scale = f", scale: [0, {10**shift}, 0, 1]" if shift else ""
        lines.append(f"  {_number(value):>12}  {settings}{scale}")
    return "\n".join(lines)


def main(args: argparse.Namespace) -> int:
    """Entry point from ``edge.commands.probe`` for modbus-tcp:// and modbus-rtu:// targets."""
    if not 1 <= args.count <= MAX_REGISTERS:
        raise ConfigError(f"--count must be 1..{MAX_REGISTERS}, got {args.count}")
    if args.address < 0 or args.address + args.count - 1 > 65535:
        raise ConfigError(f"--address {args.address} with --count {args.count} leaves 0..65535")
    if not 0 <= args.unit <= 255:
        raise ConfigError(f"--unit must be 0..255, got {args.unit}")
    expected = expect_values(args.expect) if args.expect is not None else None
    note = reference_hint(args.address, args.table)
    if note:
        print(note, file=sys.stderr)
    config = parse_target(args.target, timeout=args.timeout)
    with held_back("pymodbus"):
        registers = asyncio.run(
            read_registers(config, args.table, args.unit, args.address, args.count)
        )
    expect, unit_line = _pick_expect(registers, expected)
    report = format_report(
        registers,
        target=args.target,
        unit=args.unit,
        table=args.table,
        address=args.address,
        expect=expect,
    )
    print(report + (f"\n{unit_line}" if unit_line else ""))
    return 0


# The 4xxxx / 3xxxx habit: register numbers as printed in PLC manuals (Modicon style), one
# based, with the table in the first digit; the protocol address is zero-based (common
# practice).
_REFERENCE_RANGES = (
    (400001, 465536, "holding"),
    (300001, 365536, "input"),
    (40001, 49999, "holding"),
    (30001, 39999, "input"),
)


def reference_hint(address: int, table: str) -> str | None:
    """A note when ``address`` looks like a 4xxxx/3xxxx register number, naming the
    zero-based protocol address it most likely means."""
    for low, high, its_table in _REFERENCE_RANGES:
        if low <= address <= high:
            zero = address - low
            switch = "" if its_table == table else f" --table {its_table}"
            return (
                f"note: {address} looks like a register number from a PLC manual ({its_table} "
                f"register {address - low + 1}); the protocol address is zero-based: try "
                f"--address {zero}{switch}"
            )
    return None


# units a gauge or a PLC shows a pressure or a temperature in (common practice)
_EXPECT_UNITS = {
    "pressure": ("bar", "kPa", "MPa", "psi", "Pa", "hPa", "kgf/cm2", "inHg", "mmHg"),
    "temperature": ("degC", "degF", "K"),
}


def expect_values(text: str) -> list[tuple[float, str]]:
    """``--expect`` as (number, unit) pairs to look for: a bare number as it is; with a
    unit, that number and the same quantity in each common unit of its kind (the PLC may
    send kPa while the gauge shows bar)."""
    text = str(text).strip()
    try:
        value = float(text)
    except ValueError:
        pass
    else:
        if not math.isfinite(value):
            raise ConfigError(f"--expect is the number on the local gauge, got {text}")
        return [(value, "")]
    try:
        q = units.parse(text)
    except UnitError as exc:
        raise ConfigError(f"--expect {text!r}: {exc}") from exc
    pairs = [(units.from_si(q.value, q.unit, q.kind), q.unit)]
    for unit in _EXPECT_UNITS.get(q.kind, ()):
        if unit != q.unit:
            pairs.append((units.from_si(q.value, unit, q.kind), unit))
    return pairs


def _pick_expect(
    registers: Sequence[int], expected: list[tuple[float, str]] | None
) -> tuple[float | None, str]:
    """The expected number to mark (the first unit any decoding matches) and a line that
    names the unit the device sends in when it is not the one typed."""
    if not expected:
        return None, ""
    decodings = all_decodings(registers)
    exact = [(v, u) for v, u in expected if any(k == 0 for _, k in matches(decodings, v))]
    for value, unit in exact + expected:  # a match as sent beats one after a decimal shift
        if matches(decodings, value):
            if unit and unit != expected[0][1]:
                return value, (
                    f"the device sends {unit}: {expected[0][0]:g} {expected[0][1]} is "
                    f"{value:g} {unit}; set unit: {unit} on the tag"
                )
            return value, ""
    return expected[0][0], ""
