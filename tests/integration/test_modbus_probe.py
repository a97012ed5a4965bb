"""``steam-edge probe`` for Modbus, against a real pymodbus server on 127.0.0.1."""

from __future__ import annotations

import asyncio
import sys
from pathlib import Path

import pytest

from edge.cli import build_parser, main
from edge.commands.probe_modbus import format_report, matches, parse_target
from edge.config import ModbusRtuSource, ModbusTcpSource
from edge.errors import ConfigError
from edge.sources.decode import all_decodings

from .modbus_server import encode, modbus_server, silent_server

pytestmark = pytest.mark.slow  # starts processes

ROOT = Path(__file__).resolve().parents[2]

# 7.2 as IEEE 754 binary32 is 0x40E66666 (from memory; struct agrees), sent CDAB here,
# followed by 72 (7.2 with one implied decimal) and a zero register.
CDAB_7_2 = [0x6666, 0x40E6]
REGISTERS = {100 + i: r for i, r in enumerate([*CDAB_7_2, 72, 0])}


async def run_cli(argv: list[str]) -> int:
    """The CLI runs its own event loop, so it runs in a thread beside the server's loop."""
    return await asyncio.to_thread(main, argv)


@pytest.mark.asyncio
async def test_probe_prints_registers_and_marks_the_gauge_value(capsys):
    """Registers in hex and decimal, every decoding, and the 1 % matches of --expect."""
    async with modbus_server(holding=REGISTERS) as server:
        argv = ["probe", server.url, "--unit", "1", "--table", "holding", "--address", "100"]
        rc = await run_cli([*argv, "--count", "4", "--expect", "7.2"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "     100  0x6666     26214   26214" in out
    assert "     101  0x40E6     16614   16614" in out
    summary = out.split("within 1 % of 7.2")[1]
    assert "7.2  address: 100, type: float32, word_order: little\n" in summary
    assert "address: 102, type: int16, scale: [0, 10, 0, 1]" in summary
    assert "float64" in out and "HGFEDCBA" in out


def test_matches_within_one_percent():
    """A value 1 % off matches, 1.2 % off does not; integers match after a decimal shift."""
    found = matches(all_decodings([0x40E6, 0x6666]), 7.2)  # float32 ABCD 7.2 (IEEE 754)
    assert [(d.type, d.layout, shift) for d, shift in found] == [("float32", "ABCD", 0)]
    assert matches(all_decodings(encode(7.272, "float32")), 7.2)  # +1.0 %
    assert not matches(all_decodings(encode(7.2864, "float32")), 7.2)  # +1.2 %
    (hit,) = matches(all_decodings([725]), 7.2)[:1]
    assert (hit[0].type, hit[1]) == ("int16", 2)  # 725 / 100 = 7.25, within 1 %


def test_report_without_expect_lists_every_layout():
    """Without --expect the table still has every 32-bit layout and no summary."""
    text = format_report(
        [0x47F1, 0x2000], target="modbus-tcp://plc:502", unit=1, table="holding", address=0
    )
    assert "123456" in text  # 0x47F12000 = 123456.0 (IEEE 754)
    for layout in ("ABCD", "CDAB", "BADC", "DCBA"):
        assert layout in text
    assert "within 1 %" not in text


def test_parse_tcp_target_defaults_to_port_502():
    """modbus-tcp://HOST means port 502 (the registered Modbus port, common practice)."""
    config = parse_target("modbus-tcp://10.0.0.5")
    assert isinstance(config, ModbusTcpSource)
    assert (config.host, config.port) == ("10.0.0.5", 502)


def test_parse_rtu_target_with_settings():
    """A modbus-rtu URL carries the device path and the line settings."""
    config = parse_target("modbus-rtu:///dev/ttyUSB0?baudrate=19200&parity=e&stopbits=2")
    assert isinstance(config, ModbusRtuSource)
    assert (config.device, config.baudrate, config.parity, config.stopbits) == (
        "/dev/ttyUSB0",
        19200,
        "E",
        2,
    )


@pytest.mark.parametrize(
    "url",
    [
        "modbus-rtu:///dev/ttyUSB0?speed=9600",
        "modbus-rtu:///dev/ttyUSB0?parity=X",
        "modbus-tcp://",
        "modbus-tcp://plc:99999",
        "modbus-tcp://plc:502/extra",
    ],
)
def test_parse_bad_targets_raise_config_error(url):
    """A malformed target is a ConfigError naming it, never a traceback."""
    with pytest.raises(ConfigError, match="modbus-"):
        parse_target(url)


def test_unknown_scheme_is_one_line(capsys):
    """An unknown scheme exits 2 with one error line."""
    assert main(["probe", "http://plc"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: probe: cannot tell the protocol")


@pytest.mark.asyncio
async def test_refused_connection_is_one_line(capsys):
    """Nothing listening: exit 1 with one readable line."""
    async with modbus_server(holding={0: 1}) as server:
        url = server.url
    assert await run_cli(["probe", url, "--timeout", "0.5"]) == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "cannot connect" in err[0]


@pytest.mark.asyncio
async def test_illegal_address_is_one_line(capsys):
    """Exception 02 is reported as one line with a hint."""
    async with modbus_server(holding={0: 1}) as server:
        rc = await run_cli(["probe", server.url, "--address", "0", "--count", "3"])
    err = capsys.readouterr().err.strip().splitlines()
    assert rc == 1
    assert len(err) == 1 and "illegal data address" in err[0] and "--count" in err[0]


def test_count_over_125_refused(capsys):
    """--count above the Modbus limit of 125 registers is refused before any I/O."""
    assert main(["probe", "modbus-tcp://127.0.0.1:1", "--count", "126"]) == 2
    assert "--count must be 1..125" in capsys.readouterr().err


def test_opcua_arguments_parse():
    """The OPC UA options exist on the probe command."""
    args = build_parser().parse_args(
        ["probe", "opc.tcp://127.0.0.1:4840", "--node", "ns=2;s=A", "--node", "ns=2;s=B",
         "--browse", "--depth", "3", "--security", "Basic256Sha256,SignAndEncrypt",
         "--certificate", "c.der", "--private-key", "k.pem", "--server-certificate", "s.der",
         "--username", "monitor", "--password-env", "STEAMEDGE_OPCUA_PASSWORD"]
    )  # fmt: skip
    assert args.node == ["ns=2;s=A", "ns=2;s=B"]
    assert (args.browse, args.depth, args.private_key, args.password_env) == (
        True,
        3,
        "k.pem",
        "STEAMEDGE_OPCUA_PASSWORD",
    )


@pytest.mark.parametrize(
    ("argv", "message"),
    [
        (["--timeout", "0"], "--timeout is in seconds and above 0"),
        (["--timeout", "-1"], "--timeout is in seconds and above 0"),
        (["--timeout", "nan"], "--timeout is in seconds and above 0"),
        (["--expect", "nan"], "--expect is the number on the local gauge"),
        (["--expect", "inf"], "--expect is the number on the local gauge"),
    ],
)
def test_impossible_timeout_or_expect_refused(argv, message, capsys):
    """A timeout that is not above 0 s, or an --expect that is no number, is refused before
    any I/O (it is not reported as a connection failure)."""
    assert main(["probe", "modbus-tcp://127.0.0.1:1", *argv]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and message in err[0]


@pytest.mark.asyncio
async def test_silent_device_is_one_line_in_a_real_process():
    """A device that never answers: exit 1 and exactly one stderr line, without the
    library's own log lines or frame dump (pytest hides those in-process, so a subprocess)."""
    async with silent_server() as port:
        proc = await asyncio.create_subprocess_exec(
            sys.executable, "-m", "edge", "probe", f"modbus-tcp://127.0.0.1:{port}",
            "--timeout", "0.3",
            stdout=asyncio.subprocess.PIPE,
            stderr=asyncio.subprocess.PIPE,
            cwd=ROOT,
        )  # fmt: skip
        out, err = await asyncio.wait_for(proc.communicate(), 60)
    assert (proc.returncode, out) == (1, b"")
    lines = err.decode().splitlines()
    assert len(lines) == 1, lines
    assert lines[0].startswith("error: unit 1 holding 0..1: ")
    assert "no answer within" in lines[0]


def test_a_4xxxx_register_number_gets_the_zero_based_address_suggested():
    """--address 40001 (the 4xxxx habit of PLC manuals) names the protocol address 0; a
    3xxxx number names the input table too (Modicon numbering, common practice)."""
    from edge.commands.probe_modbus import reference_hint

    assert "try --address 0" in (reference_hint(40001, "holding") or "")
    assert "try --address 10 --table input" in (reference_hint(30011, "holding") or "")
    assert reference_hint(100, "holding") is None


@pytest.mark.asyncio
async def test_probe_of_address_40101_prints_the_note_and_still_reads(capsys):
    """The note goes to stderr; the read of 40101 as given goes on (it is a legal address)."""
    async with modbus_server(holding={40101: 7}) as server:
        rc = await run_cli(["probe", server.url, "--address", "40101", "--count", "1"])
    captured = capsys.readouterr()
    assert rc == 0 and "try --address 100" in captured.err
    assert "holding registers 40101..40101" in captured.out


@pytest.mark.asyncio
async def test_expect_with_a_unit_finds_the_unit_the_device_sends(capsys):
    """--expect '0.72 MPa' matches the register holding 7.2 and says the device sends bar
    (1 MPa = 10 bar, exact)."""
    async with modbus_server(holding=REGISTERS) as server:
        argv = ["probe", server.url, "--address", "100", "--count", "4"]
        rc = await run_cli([*argv, "--expect", "0.72 MPa"])
    out = capsys.readouterr().out
    assert rc == 0
    assert "7.2  address: 100, type: float32, word_order: little" in out
    assert "the device sends bar: 0.72 MPa is 7.2 bar; set unit: bar on the tag" in out


def test_expect_with_an_unknown_unit_is_refused():
    """An --expect whose unit is not known is one clear error."""
    from edge.commands.probe_modbus import expect_values

    with pytest.raises(ConfigError, match="--expect '7 furlongs'"):
        expect_values("7 furlongs")
