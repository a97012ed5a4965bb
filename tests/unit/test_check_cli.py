"""steam-edge check: the example passes; every broken config names its mistake's path and
line on stderr and exits 2; unreadable files give one line, never a traceback."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import pytest

from edge.cli import main

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "config" / "example.yaml"
BROKEN = sorted((Path(__file__).parent / "broken_configs").glob("*.yaml"))
MARKER = "# <- mistake"


def _expectation(path: Path) -> tuple[str, str, int]:
    """(config path, message fragment, line of the marked mistake) written in the file."""
    lines = path.read_text(encoding="utf-8").splitlines()
    key = re.search(r"^# path: (.*)$", lines[1]).group(1)  # type: ignore[union-attr]
    says = re.search(r"^# says: (.*)$", lines[2]).group(1)  # type: ignore[union-attr]
    marked = [i + 1 for i, line in enumerate(lines) if line.endswith(MARKER)]
    assert len(marked) == 1, f"{path.name}: exactly one line must carry the marker"
    return ("" if key == "-" else key), says, marked[0]


def _check(capsys: pytest.CaptureFixture[str], path: Path | str) -> tuple[int, str, str]:
    code = main(["check", "-c", str(path)])
    out = capsys.readouterr()
    return code, out.out, out.err


def test_enough_broken_configs() -> None:
    """At least 20 broken configs, one mistake each, sit beside these tests."""
    assert len(BROKEN) >= 20


def test_example_passes(capsys: pytest.CaptureFixture[str]) -> None:
    """config/example.yaml checks clean: exit 0, nothing on stderr."""
    code, out, err = _check(capsys, EXAMPLE)
    assert (code, err) == (0, "")
    assert out.startswith(f"{EXAMPLE}: valid, version 1\n")


def test_example_summary_names_every_part(capsys: pytest.CaptureFixture[str]) -> None:
    """The summary lists the site, barometer, sources, tags, points, alarms, channels."""
    _, out, _ = _check(capsys, EXAMPLE)
    for expected in (
        "site: hollin-vale-dairy",
        "barometer: altitude 185 m (standard atmosphere), live tag baro (max age 1 min)",
        "sources (4):",
        "  boiler-house-plc: modbus-tcp 127.0.0.1:5020 unit 1, every 1 s, timeout 500 ms, 7 tags",
        "    drum_p: holding 0 float32 big-endian words; bar gauge",
        "    hp_p: node ns=2;s=HP.Pressure; MPa absolute",
        "  hotwell-rtu: modbus-rtu /dev/ttyUSB0 19200 8E1 unit 5, every 2 s",
        "  drum: saturated, pressure drum_p, temperature drum_t, tolerance 2 K",
        "alarms (9, plus 13 built-in cause, quality and saturation alarms):",
        "  hp-superheat-low: hp_header.superheat low 25 K, priority high",
        "  oncall: webhook https://hooks.example.invalid/steam, from priority high",
        "http: listen 127.0.0.1:9847, token from env STEAMEDGE_API_TOKEN",
        "storage: /var/lib/steam-edge/state.sqlite, keep 90 d or 1000000 events",
    ):
        assert expected in out


@pytest.mark.parametrize("path", BROKEN, ids=[p.stem for p in BROKEN])
def test_broken_config_names_path_and_line(path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Each broken config exits 2 with one error naming its file, line, path and cause."""
    key, says, line = _expectation(path)
    code, out, err = _check(capsys, path)
    assert code == 2
    assert out == ""
    errors = [e for e in err.splitlines() if e.startswith("error: ")]
    assert len(errors) == 1, err
    where = f"error: {path}:{line}: " + (f"{key}: " if key else "")
    assert errors[0].startswith(where), errors[0]
    assert says in errors[0]
    assert "Traceback" not in err


def test_many_mistakes_all_reported(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """Schema errors and cross-check errors in one file are all printed, ordered by line."""
    text = (ROOT / "tests/unit/broken_configs/unit_typo.yaml").read_text(encoding="utf-8")
    text = text.replace("word_order", "x").replace("reference: gauge", "reference: gage")
    text = text.replace("pressure: drum_p,", "pressure: drum_px,").replace("5020", "5020x")
    cfg = tmp_path / "many.yaml"
    cfg.write_text(text, encoding="utf-8")
    code, _, err = _check(capsys, cfg)
    lines = [e for e in err.splitlines() if e.startswith("error: ")]
    assert code == 2
    assert [re.search(r":(\d+): ([^:]+):", e).group(2) for e in lines] == [  # type: ignore[union-attr]
        "sources[0].port",
        "sources[0].tags[0].reference",
        "sources[0].tags[1].unit",
        "points[0].pressure",
    ]
    assert err.splitlines()[-1] == f"4 problems in {cfg}"


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda d: d / "absent.yaml", "no such file"),
        (lambda d: d, "this is a folder, not a config file"),
        (lambda d: _write(d / "latin1.yaml", b"site: caf\xe9\n"), "not UTF-8 text (byte 0xe9)"),
        (lambda d: _write(d / "empty.yaml", b"  \n# nothing\n"), "the file is empty"),
        (lambda d: _write(d / "list.yaml", b"- a\n- b\n"), "expected a mapping of keys"),
    ],
    ids=["missing", "directory", "not-utf8", "empty", "list"],
)
def test_unreadable_file_is_one_line(make, message, tmp_path: Path, capsys) -> None:
    """A missing, folder, non-UTF-8, empty or list file gives one error line and exit 2."""
    path = make(tmp_path)
    code, out, err = _check(capsys, path)
    assert code == 2
    assert out == ""
    errors = err.splitlines()
    assert len(errors) == 2 and errors[0].startswith(f"error: {path}")
    assert message in errors[0]


def _write(path: Path, data: bytes) -> Path:
    path.write_bytes(data)
    return path


def test_long_option_and_real_process(tmp_path: Path) -> None:
    """`python -m edge check --config` in a real process: exit 2, no traceback."""
    bad = tmp_path / "bad.yaml"
    bad.write_text("version: 1\nsite: [\n", encoding="utf-8")
    run = subprocess.run(
        [sys.executable, "-m", "edge", "check", "--config", str(bad)],
        capture_output=True,
        text=True,
        timeout=60,
        cwd=ROOT,
    )
    assert run.returncode == 2
    assert run.stdout == ""
    assert run.stderr.startswith(f"error: {bad}:3: invalid YAML")
    assert "Traceback" not in run.stderr


@pytest.mark.parametrize(
    "path", [EXAMPLE, ROOT / "config" / "demo.yaml", *BROKEN], ids=lambda p: p.stem
)
def test_check_agrees_with_run(path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    """check exits 0 exactly when run would compile the file (edge.evaluation.compile_plan)."""
    from edge.config import load_config
    from edge.errors import ConfigError
    from edge.evaluation import compile_plan

    code, _, _ = _check(capsys, path)
    try:
        compile_plan(load_config(path))
    except ConfigError:
        run_accepts = False
    else:
        run_accepts = True
    assert (code == 0) is run_accepts


def test_policy_none_off_this_machine_is_a_warning(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """An OPC UA source with security policy None towards another host passes with a warning."""
    config = tmp_path / "plain.yaml"
    config.write_text(
        "version: 1\n"
        "site: test-site\n"
        "barometer: {fixed: 101.325 kPa}\n"
        "sources:\n"
        "  - name: far-opcua\n"
        "    protocol: opcua\n"
        "    endpoint: opc.tcp://plc.example.invalid:4840\n"
        "    tags: [{name: p, node: 'ns=2;s=P', unit: MPa, reference: absolute}]\n"
        "  - name: near-opcua\n"
        "    protocol: opcua\n"
        "    endpoint: opc.tcp://127.0.0.1:4840\n"
        "    tags: [{name: q, node: 'ns=2;s=Q', unit: MPa, reference: absolute}]\n",
        encoding="utf-8",
    )
    code, _, err = _check(capsys, config)
    assert code == 0
    warnings = [line for line in err.splitlines() if line.startswith("warning: ")]
    assert len(warnings) == 1
    assert "far-opcua" in warnings[0] and "policy None" in warnings[0]


def test_example_has_no_security_warning(capsys: pytest.CaptureFixture[str]) -> None:
    """The example's OPC UA sources are encrypted or on this machine: no warning."""
    code, _, err = _check(capsys, EXAMPLE)
    assert code == 0 and "warning:" not in err


VACUUM_CONFIG = """version: 1
site: test-site
barometer: {BARO}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {{name: cond_p, table: holding, address: 0, type: float32, unit: kPa vac{RANGE}}}
      - {{name: cond_t, table: holding, address: 2, type: float32, unit: degC}}
points:
  - {{name: condenser, pressure: cond_p, temperature: cond_t, state: saturated}}
"""


@pytest.mark.parametrize(
    ("baro", "range_", "expected"),
    [
        ("{fixed: 101.325 kPa}", ", valid_range: [0, 91.325]", "up to 6.8 K at its deepest"),
        ("{altitude: 420 m}", "", "6.8 K at 10 kPa abs, 1.5 K at 50 kPa abs"),
    ],
)
def test_vacuum_point_on_a_fixed_barometer_is_a_warning(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], baro, range_, expected
) -> None:
    """A vacuum point on a fixed or altitude barometer passes with a warning that gives the
    Tsat error +-3 kPa of weather makes at its pressure."""
    config = tmp_path / "vac.yaml"
    config.write_text(VACUUM_CONFIG.format(BARO=baro, RANGE=range_), encoding="utf-8")
    code, _, err = _check(capsys, config)
    warnings = [line for line in err.splitlines() if line.startswith("warning: ")]
    assert code == 0 and len(warnings) == 1
    # IAPWS-IF97 (R7-97, 2012) equation 31: Tsat(13 kPa) - Tsat(10 kPa) = 6.8 K
    assert "point condenser" in warnings[0] and expected in warnings[0]
    assert "its tolerance is 2 K" in warnings[0] and "barometer.tag" in warnings[0]


def test_vacuum_point_on_a_live_barometer_has_no_warning(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """With a live barometer tag the weather is followed: no warning."""
    text = VACUUM_CONFIG.format(BARO="{fixed: 101.325 kPa, tag: baro}", RANGE="").replace(
        "      - {name: cond_t",
        "      - {name: baro, table: holding, address: 4, type: float32, unit: kPaa}\n"
        "      - {name: cond_t",
    )
    config = tmp_path / "vac.yaml"
    config.write_text(text, encoding="utf-8")
    code, _, err = _check(capsys, config)
    assert code == 0 and "warning:" not in err


@pytest.mark.parametrize(
    ("content", "says"),
    [
        (None, "/dev/zero is larger than 64 KiB: not a secret file"),
        (b" \n", "is empty (or only whitespace)"),
    ],
)
def test_unusable_token_file_is_a_check_error(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], content: bytes | None, says: str
) -> None:
    """A token file the service would refuse (endless /dev/zero, blank) fails check with
    the secret reader's own words, at once, on the token_file line."""
    token = "/dev/zero"
    if content is not None:
        token = str(tmp_path / "token")
        Path(token).write_bytes(content)
    config = tmp_path / "edge.yaml"
    config.write_text(
        "version: 1\n"
        "site: test-site\n"
        "barometer: {fixed: 101.325 kPa}\n"
        "sources:\n"
        "  - name: plc\n"
        "    protocol: modbus-tcp\n"
        "    host: 127.0.0.1\n"
        "    tags: [{name: p, table: holding, address: 0, type: float32, unit: bar,"
        " reference: gauge}]\n"
        "http:\n"
        f"  token_file: {token}\n",
        encoding="utf-8",
    )
    code, _, err = _check(capsys, config)
    assert code == 2
    assert f"{config}:10: http.token_file: " in err and says in err
