"""``steam-edge check`` on hostile configs (issue 10, items 11 and 12): one error line with
file and line and exit 2 for every one, never a traceback; values that pass the schema but
hurt at run time are bounded. And the seeded fuzz: 500 mutations of config/example.yaml."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from edge.cli import main
from tests.fuzz_check import EXAMPLE, fuzz

FUZZ_SEED = 20261203
FUZZ_RUNS = 500
TEMPLATE = "message: Drum pressure high; check firing rate and steam demand"


def _check(capsys: pytest.CaptureFixture[str], path: Path) -> tuple[int, list[str]]:
    code = main(["check", "-c", str(path)])
    err = capsys.readouterr().err.splitlines()
    return code, [line for line in err if line.startswith("error: ")]


def _variant(tmp_path: Path, old: str, new: str) -> Path:
    text = EXAMPLE.read_text(encoding="utf-8")
    assert old in text, old
    path = tmp_path / "edge.yaml"
    path.write_text(text.replace(old, new, 1), encoding="utf-8")
    return path


def _line_of(path: Path, fragment: str) -> int:
    lines = path.read_text(encoding="utf-8").split("\n")
    return next(i + 1 for i, line in enumerate(lines) if fragment in line)


@pytest.mark.parametrize(
    ("new", "says"),
    [
        ("protocol: [modbus-tcp]", "unknown protocol"),
        ("protocol: {modbus-tcp: 1}", "unknown protocol"),
        ("protocol: !!int 'abc'", "'abc' is not a valid !!int"),
        ("protocol: !!float '1 s'", "'1 s' is not a valid !!float"),
        ("protocol: !!bool 'maybe'", "'maybe' is not a valid !!bool"),
        ("protocol: !!timestamp 'nope'", "'nope' is not a valid !!timestamp"),
    ],
)
def test_odd_values_for_protocol_are_one_located_error(tmp_path, capsys, new, says):
    """protocol as a list, a mapping, or an explicit tag with content it cannot hold: exit
    2, and the error names the file and the protocol's line."""
    path = _variant(tmp_path, "protocol: modbus-tcp", new)
    code, errors = _check(capsys, path)
    line = _line_of(path, new)
    assert code == 2
    assert any(e.startswith(f"error: {path}:{line}: ") and says in e for e in errors), errors


@pytest.mark.parametrize("char", ["\x01", "\x1b", "\x7f"])
def test_a_control_character_is_an_error_on_its_line(tmp_path, capsys, char):
    """A control character in a value: one error naming its line, exit 2."""
    path = _variant(tmp_path, "site: ", f"site: x{char}")
    code, errors = _check(capsys, path)
    assert code == 2 and len(errors) == 1
    assert errors[0].startswith(f"error: {path}:{_line_of(path, 'site: ')}: ")
    assert f"U+{ord(char):04X}" in errors[0]


def test_deep_nesting_is_an_error_on_its_line(tmp_path, capsys):
    """A value nested 5,000 brackets deep: one error naming its line, exit 2."""
    path = _variant(tmp_path, "site: ", "deep: " + "[" * 5000 + "]" * 5000 + "\nsite: ")
    code, errors = _check(capsys, path)
    assert code == 2 and len(errors) == 1
    assert errors[0].startswith(f"error: {path}:{_line_of(path, 'deep: ')}: "), errors


@pytest.mark.parametrize(
    ("old", "new", "says"),
    [
        ("interval: 1 s", "interval: 1 ms", "1 ms is outside 100 ms..1 h"),
        ("retention: 90 d", "retention: 90 s", "90 s is outside 1 d..3650 d"),
        (TEMPLATE, "message: '{value:100000000}'", "asks for 100000000 characters"),
        (TEMPLATE, "message: " + "x" * 600, "at most 500"),
    ],
)
def test_values_that_hurt_at_run_time_are_refused(tmp_path, capsys, old, new, says):
    """interval 1 ms, retention 90 s, a template padding to 100 MB, a 600-character
    template: each one located error, exit 2."""
    path = _variant(tmp_path, old, new)
    code, errors = _check(capsys, path)
    line = _line_of(path, new.strip()[:40])
    assert code == 2
    assert any(e.startswith(f"error: {path}:{line}: ") and says in e for e in errors), errors


def test_fuzzed_example_configs_never_traceback(tmp_path):
    """500 seeded mutations of config/example.yaml: exit 0 or 2 every time, 0 tracebacks,
    0 errors without a line where the file has lines."""
    outcome = fuzz(FUZZ_RUNS, FUZZ_SEED, tmp_path)
    assert outcome.tried == FUZZ_RUNS
    assert outcome.tracebacks == []
    assert outcome.without_line == []
    assert set(outcome.exit_codes) <= {0, 2} and outcome.exit_codes.get(2, 0) > FUZZ_RUNS // 2


def test_example_still_passes(capsys):
    """The example itself passes with the bounds (exit 0)."""
    assert main(["check", "-c", str(EXAMPLE)]) == 0
    assert not re.search(r"^error", capsys.readouterr().err, re.M)
