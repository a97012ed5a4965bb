"""Fuzzing ``steam-edge check`` at length: seeded mutations of config/example.yaml (the CI
test runs 500 of them; this runs as many as asked, over several seeds).

Run: ``python tests/bench/check_fuzz.py [--runs 5000] [--seed 1]`` (exit 1 on any
traceback or any error without a line). Prints the figures, and the check rate beside a
baseline measured in the same run: checking the unmutated example.
"""

from __future__ import annotations

import argparse
import collections
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from tests.fuzz_check import EXAMPLE, fuzz, run_check


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--runs", type=int, default=5000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        base = folder / "example.yaml"
        base.write_text(EXAMPLE.read_text(encoding="utf-8"), encoding="utf-8")
        t0 = time.process_time()
        for _ in range(50):
            run_check(base)
        baseline = (time.process_time() - t0) / 50
        t0 = time.process_time()
        outcome = fuzz(args.runs, args.seed, folder)
        each = (time.process_time() - t0) / max(1, outcome.tried)
    print(f"mutations tried:        {outcome.tried} (seed {args.seed})")
    print(f"exit codes:             {dict(sorted(outcome.exit_codes.items()))}")
    print(f"tracebacks:             {len(outcome.tracebacks)}")
    print(f"errors without a line:  {len(outcome.without_line)}")
    print(f"CPU per check:          {each * 1e3:.1f} ms mutated, {baseline * 1e3:.1f} ms example")
    print(f"ratio mutated/example:  {each / baseline:.2f}")
    for what, n in collections.Counter(t.split(": ", 1)[1] for t in outcome.tracebacks).items():
        print(f"  traceback x{n}: {what[:160]}")
    for line in outcome.without_line[:20]:
        print(f"  no line: {line[:160]}")
    return 1 if outcome.tracebacks or outcome.without_line else 0


if __name__ == "__main__":
    sys.exit(main())
