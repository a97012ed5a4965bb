"""Flow evaluation speed: one configured flow per pass, by meter kind.

Run: ``python tests/bench/flow.py`` (``--strict`` exits 1 when a goal is missed).

Each flow of an invented steam main (10-13 bara, 200-260 degC; 102.26 mm pipe) is
evaluated with ``edge.flow.meters.evaluate_one`` from a point state and a tag sample, as the
evaluation pass does it: the fluid state (IF97 density and enthalpy, R12-08 viscosity, the
isentropic exponent from the IF97 speed of sound), thermal expansion, and for primary
elements the ISO 5167 solution with its Reynolds iteration and limits of use. Sixteen
states are cycled so no result comes from a cache.

Baseline, measured in the same run: one ``edge.steam.properties(p, T)`` call at the same
states (the IF97 figure every superheated point already costs). The ratio says what a flow
costs on top of a property call.

Goal: < 100 us per orifice flow evaluation on one core (100 flows < 1 % of a core at 1 s).
Times are CPU time of this thread (``time.thread_time``), best of many short rounds.
"""

from __future__ import annotations

import argparse
import sys
import time
from collections.abc import Callable
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from edge import steam
from edge.flow import iso5167, materials
from edge.flow.meters import FlowSpec, Reference, evaluate_one
from edge.model import GOOD, PointState, Reading, Sample

GOAL_US = 100.0
STATES = [(10e5 + 2e4 * i, 473.15 + 4.0 * i) for i in range(16)]


def _point(p: float, t: float) -> dict[str, PointState]:
    readings = {"pressure": Reading(p, GOOD, "Pa"), "temperature": Reading(t, GOOD, "K")}
    return {"main": PointState("main", "superheated", readings, GOOD, phase="superheated")}


def _spec(meter: str) -> FlowSpec:
    element = {
        "orifice": iso5167.Element("orifice", taps="flange"),
        "isa1932_nozzle": iso5167.Element("isa1932_nozzle"),
        "venturi": iso5167.Element("venturi", convergent="machined"),
    }.get(meter)
    return FlowSpec(
        name=f"main-{meter}",
        meter=meter,
        point="main",
        state="superheated",
        element=element,
        dp="dp" if element else None,
        signal=None if element else "q",
        signal_kind="volume_flow",
        pipe=0.10226,
        bore=0.060,
        pipe_expansion=materials.EXPANSION["carbon_steel"],
        bore_expansion=materials.EXPANSION["stainless_316"],
        reference=Reference(enthalpy=440e3),
    )


def best_us(fn: Callable[[int], object], n: int = 2000, rounds: int = 15) -> float:
    best = float("inf")
    for _ in range(rounds):
        t0 = time.thread_time()
        for i in range(n):
            fn(i)
        best = min(best, (time.thread_time() - t0) / n)
    return best * 1e6


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--strict", action="store_true", help="exit 1 when a goal is missed")
    args = ap.parse_args()
    points = [_point(p, t) for p, t in STATES]
    snaps = [
        {"dp": Sample("dp", 25e3 + 500.0 * i, GOOD, 0.0, 0.0), "q": Sample("q", 0.2, GOOD, 0, 0)}
        for i in range(len(STATES))
    ]
    base = best_us(lambda i: steam.properties(*STATES[i % 16]))
    print(f"baseline: one IF97 properties(p, T) call   {base:6.1f} us")
    ok = True
    for meter in ("orifice", "isa1932_nozzle", "venturi", "volumetric", "mass"):
        spec = _spec(meter)
        state = evaluate_one(spec, points[0], snaps[0])
        assert state.mass_flow is not None and state.quality.level > 0, (meter, state.quality)
        us = best_us(lambda i, s=spec: evaluate_one(s, points[i % 16], snaps[i % 16]))
        iters = state.result.iterations if state.result is not None else 0
        print(
            f"flow {meter:18}  {us:6.1f} us per evaluation  ({us / base:4.1f}x baseline"
            + (f", {iters} Reynolds iterations)" if iters else ")")
        )
        if meter == "orifice":
            ok = us < GOAL_US
            print(f"  100 orifice flows at 1 s: {us * 100 / 1e4:.2f} % of one core")
    print("goal met" if ok else "GOAL MISSED")
    return 0 if ok or not args.strict else 1


if __name__ == "__main__":
    sys.exit(main())
