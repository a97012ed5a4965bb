"""Seeded mutations of ``config/example.yaml`` for fuzzing ``steam-edge check`` (issue 10):
every mutation must end in exit 0 or 2 with one line per problem, never a traceback, and
every problem of a file whose lines exist names its file and line.

Used by ``tests/unit/test_check_fuzz.py`` (500 mutations in CI) and
``tests/bench/check_fuzz.py`` (as many as asked, with figures).
"""

from __future__ import annotations

import argparse
import contextlib
import io
import random
import re
import traceback
from dataclasses import dataclass, field
from pathlib import Path

REPO = Path(__file__).resolve().parents[1]
EXAMPLE = REPO / "config" / "example.yaml"

# values a hostile or careless hand puts where a scalar was
VALUES = [
    "[1, 2]",
    "{a: 1}",
    "!!float '1 s'",
    "!!int 'abc'",
    "!!binary 'zz'",
    "!!timestamp 'nope'",
    "!!bool 'maybe'",
    "!!str",
    "!!map [1]",
    "!!python/object:os.system 'id'",
    '"\\x01\\x02"',
    '"\\ud83d"',
    "1e999",
    "-1e999",
    "-1",
    "0",
    "99999999999999999999999999999999",
    '""',
    "~",
    "true",
    "'" + "x" * 5000 + "'",
    "*nowhere",
    "&loop [*loop]",
    "1 ms",
    "1 ns",
    "0 s",
    "90 s",
    "1e9 d",
    "NaN bar",
    "inf K",
    "'-5 K'",
    "'{value}' ",
    "'{value:1000000}'",
    "'{' ",
    "modbus-tcp",
    "opcua",
    "[modbus-tcp]",
    "{modbus-tcp: 1}",
    "/dev/zero",
    "'../../../../etc/shadow'",
]
CONTROL = ["\x00", "\x01", "\x07", "\x1b", "\x7f", "\ufeff", "\u2028", "\x85", "\t"]
_SCALAR = re.compile(r"^(\s*(?:- )?[A-Za-z_][\w-]*:\s+)(\S.*)$")


def mutate(text: str, rng: random.Random) -> tuple[str, str]:
    """One mutation of ``text``; returns (new text, what was done)."""
    lines = text.split("\n")
    i = rng.randrange(len(lines))
    op = rng.choice(
        ["value", "value", "value", "delete", "duplicate", "swap", "indent", "control",
         "deep_flow", "deep_block", "truncate", "key", "bytes"]
    )  # fmt: skip
    candidates = [n for n, line in enumerate(lines) if _SCALAR.match(line)]
    if op == "value" and candidates:
        n = rng.choice(candidates)
        m = _SCALAR.match(lines[n])
        assert m is not None
        value = rng.choice(VALUES)
        lines[n] = m.group(1) + value
        return "\n".join(lines), f"line {n + 1}: value -> {value[:30]!r}"
    if op == "delete":
        del lines[i]
    elif op == "duplicate":
        lines.insert(i, lines[i])
    elif op == "swap":
        j = rng.randrange(len(lines))
        lines[i], lines[j] = lines[j], lines[i]
    elif op == "indent":
        lines[i] = " " * rng.choice([1, 2, 3, 5]) + lines[i]
    elif op == "control":
        pos = rng.randrange(len(lines[i]) + 1)
        lines[i] = lines[i][:pos] + rng.choice(CONTROL) + lines[i][pos:]
    elif op == "deep_flow":
        depth = rng.choice([100, 1000, 5000])
        lines.insert(i, "deep: " + "[" * depth + "]" * depth)
    elif op == "deep_block":
        depth = rng.choice([60, 300])
        lines[i:i] = ["deep:"] + [" " * (2 * d + 2) + f"k{d}:" for d in range(depth)]
    elif op == "truncate":
        cut = rng.randrange(len(text))
        return text[:cut], f"truncated at {cut}"
    elif op == "key":
        lines.insert(i, rng.choice(["unknown_key: 1", "- stray", "? complex", "<<: *nope"]))
    elif op == "bytes":
        lines.insert(i, "".join(chr(rng.randrange(1, 0x3000)) for _ in range(20)))
    return "\n".join(lines), f"line {i + 1}: {op}"


@dataclass
class Outcome:
    tried: int = 0
    exit_codes: dict[int, int] = field(default_factory=dict)
    tracebacks: list[str] = field(default_factory=list)
    without_line: list[str] = field(default_factory=list)


# problems about the whole file, which have no line to name
_WHOLE_FILE = ("the file is empty", "not UTF-8 text", "expected a mapping of keys")


def run_check(path: Path) -> tuple[int, str]:
    """``steam-edge check -c path`` in this process: (exit code, stderr)."""
    from edge.commands import check

    err, out = io.StringIO(), io.StringIO()
    with contextlib.redirect_stderr(err), contextlib.redirect_stdout(out):
        code = check.main(argparse.Namespace(config=str(path)))
    return code, err.getvalue()


def fuzz(n: int, seed: int, folder: Path) -> Outcome:
    rng = random.Random(seed)
    base = EXAMPLE.read_text(encoding="utf-8")
    outcome = Outcome()
    path = folder / "fuzz.yaml"
    for k in range(n):
        text, what = mutate(base, rng)
        if rng.random() < 0.3:  # some get a second mutation on top
            text, more = mutate(text, rng)
            what += "; " + more
        path.write_text(text, encoding="utf-8", errors="surrogatepass")
        outcome.tried += 1
        try:
            code, err = run_check(path)
        except BaseException as exc:
            if isinstance(exc, KeyboardInterrupt):
                raise
            tb = traceback.format_exc().strip().splitlines()[-1]
            outcome.tracebacks.append(f"#{k} {what}: {tb}")
            continue
        outcome.exit_codes[code] = outcome.exit_codes.get(code, 0) + 1
        located = re.compile(re.escape(f"error: {path}:") + r"\d+: ")
        for line in err.splitlines():
            if line.startswith("warning: ") or re.fullmatch(r"\d+ problems? in .*", line):
                continue
            if located.match(line) or (
                line.startswith(f"error: {path}: ") and any(w in line for w in _WHOLE_FILE)
            ):
                continue
            outcome.without_line.append(f"#{k} {what}: {line[:200]}")
    return outcome
