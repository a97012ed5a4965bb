"""Commissioning hints against planted mistakes and honest faults, seeded.

Run: ``python tests/bench/hints.py`` (``--cases N``, ``--seed S``; ``--strict`` exits 1
when an acceptance figure is missed).

Every case is one saturated drum watched over a window of 16 samples through
``edge.derive.step``, exactly as the runtime does:

* drum pressure 3..40 barg (log-uniform), barometer 95..103 kPa (the monitor's barometer
  within 0.1 kPa of it), tolerance 2 K;
* sensor noise on every sample: temperature 0.1 K RMS, pressure 0.05 % of reading RMS;
* how the pressure moves over the window (each a third of the cases): ``steady``
  (+-0.5 %), ``wander`` (+-5 %, ordinary load changes) or ``swing`` (+-20 %, a start-up or
  a large load swing); in half the cases a second, correct pressure transmitter on the
  same thermowell is configured as its own saturated point (``twin``).

Planted mistakes (each case one, drawn evenly from the four kinds): the transmitter really
reads bar, kPa, MPa, psi or kg/cm2, gauge or absolute, and its tag says

* another reference (any of absolute, gauge, vacuum);
* another unit (any unit ``edge.units`` knows);
* another unit and another reference;
* or the thermometer's unit is wrong (degC, degF, K).

Honest faults (the configuration is right): the thermometer reads 1..10 K low or high,
or the point is not really saturated (subcooled water 2..60 K below Tsat, or superheated
steam 2..150 K above it, at a steady temperature, configured as saturated), or the
thermowell lags the pressure (each sample 5..30 % of the way to Tsat); and honest noise
(nothing wrong at all).

Each mistake case is classed by what the samples can show (noise-free replay, margins of
1.5x the hint thresholds so the borderline is its own class):

* ``invisible``: the mistake keeps the point inside its tolerance in some sample;
* ``borderline``: it shows by less than 0.5 K in some sample (noise takes samples back
  inside and empties the window), or the samples sit between ``hidden`` and
  ``detectable``;
* ``hidden``: it shows, but an honest cause (a steady offset, a point that is not really
  saturated) explains the samples as well: a hint would be a guess;
* ``detectable``: the samples rule the honest causes out.

Outcomes: ``right`` (the fix names the true configuration, and every candidate that fits
the noise-free samples as well is named beside it), ``ambiguous-unnamed`` (the true fix
is named but an equally fitting one is not), ``partial`` (unit and reference were both
wrong and the fix names only one), ``wrong`` (a fix that is not the truth), ``none`` (no
fix). On honest cases any fix is a ``false hint``. Acceptance (issue 13): right >= 95 %
of detectable mistakes, wrong fixes <= 0.5 % of all mistakes, false hints <= 0.5 % of
honest cases, no ambiguous case left unnamed.
"""

from __future__ import annotations

import argparse
import math
import random
import sys
import time
from collections import Counter
from dataclasses import dataclass

from edge import steam, units
from edge.derive import EMPTY_WINDOW, PointSpec, step
from edge.derive import hints as H
from edge.model import GOOD, BarometerReading, Sample

WINDOW = 16
TOL = 2.0
T_NOISE = 0.1  # K RMS (--t-noise)
P_NOISE = 5e-4  # of reading, RMS
PROFILES = {"steady": 0.005, "wander": 0.05, "swing": 0.20}
TRUE_UNITS = ("bar", "kPa", "MPa", "psi", "kg/cm2")
TRUE_REFS = ("gauge", "absolute")
T_UNITS = ("degC", "degF", "K")
MARGIN = 1.5
VISIBLE_MARGIN = 0.5  # K beyond the tolerance before noise cannot hide a sample


@dataclass(frozen=True)
class Case:
    kind: str  # reference | unit | unit_reference | temperature_unit | offset | mislabel | noise
    profile: str
    twin: bool
    p0: float  # true absolute pressure at the centre, Pa
    baro: float  # true barometer, Pa
    baro_seen: float  # the monitor's barometer, Pa
    true_unit: str
    true_ref: str
    cfg_unit: str
    cfg_ref: str
    true_t_unit: str
    cfg_t_unit: str
    t_offset: float = 0.0  # K, honest thermometer offset
    t_fixed: float | None = None  # K, a steady temperature (mislabelled point)
    t_lag: float = 0.0  # fraction of the way to Tsat a lagging thermowell moves per sample


def draw(rng: random.Random, kind: str) -> Case:
    profile = rng.choice(tuple(PROFILES))
    twin = rng.random() < 0.5
    gauge = math.exp(rng.uniform(math.log(3e5), math.log(40e5)))
    baro = rng.uniform(95e3, 103e3)
    seen = baro + rng.gauss(0.0, 100.0)
    true_unit, true_ref = rng.choice(TRUE_UNITS), rng.choice(TRUE_REFS)
    cfg_unit, cfg_ref = true_unit, true_ref
    true_t = rng.choice(T_UNITS)
    cfg_t = true_t
    all_units = [u for u in units.PRESSURE_UNITS if not _same_unit(u, true_unit)]
    if kind == "reference":
        cfg_ref = rng.choice([r for r in H.REFERENCES if r != true_ref])
    elif kind == "unit":
        cfg_unit = rng.choice(all_units)
    elif kind == "unit_reference":
        cfg_unit = rng.choice(all_units)
        cfg_ref = rng.choice([r for r in H.REFERENCES if r != true_ref])
    elif kind == "temperature_unit":
        cfg_t = rng.choice([u for u in T_UNITS if u != true_t])
    p0 = gauge + baro
    offset, fixed, lag = 0.0, None, 0.0
    if kind == "lag":
        lag = rng.uniform(0.05, 0.3)
    elif kind == "offset":
        offset = rng.choice((-1.0, 1.0)) * rng.uniform(1.0, 10.0)
    elif kind == "mislabel":
        ts = steam.tsat(p0)
        fixed = ts - rng.uniform(2.0, 60.0) if rng.random() < 0.5 else ts + rng.uniform(2, 150)
    return Case(
        kind, profile, twin, p0, baro, seen, true_unit, true_ref, cfg_unit, cfg_ref,
        true_t, cfg_t, offset, fixed, lag,
    )  # fmt: skip


def _same_unit(a: str, b: str) -> bool:
    return H._same(units.PRESSURE_UNITS[a], units.PRESSURE_UNITS[b])


def _reading(p_abs: float, baro: float, ref: str) -> float:
    return {"absolute": p_abs, "gauge": p_abs - baro, "vacuum": baro - p_abs}[ref]


def trajectory(case: Case, rng: random.Random | None) -> list[tuple[float, float, float]]:
    """(drum raw value SI as configured, temperature K as configured, twin raw) per sample;
    noise-free when ``rng`` is None."""
    amp = PROFILES[case.profile]
    gauge0 = case.p0 - case.baro
    out = []
    lagged = steam.tsat(case.p0)
    for k in range(WINDOW):
        g = gauge0 * (1.0 + amp * math.sin(2 * math.pi * k / WINDOW))
        p = g + case.baro  # true absolute
        t = steam.tsat(p) + case.t_offset if case.t_fixed is None else case.t_fixed
        if case.t_lag:
            lagged += (steam.tsat(p) - lagged) * case.t_lag
            t = lagged
        p_seen, t_seen = p, t
        if rng is not None:
            p_seen = p * (1.0 + rng.gauss(0.0, P_NOISE))
            t_seen = t + rng.gauss(0.0, T_NOISE)
        number = _reading(p_seen, case.baro, case.true_ref) / units.PRESSURE_UNITS[case.true_unit]
        raw = number * units.PRESSURE_UNITS[case.cfg_unit]
        t_number = units.from_si(t_seen, case.true_t_unit, "temperature")
        t_cfg = units.to_si(t_number, case.cfg_t_unit, "temperature")
        twin = _reading(p_seen, case.baro, "gauge")
        out.append((raw, t_cfg, twin))
    return out


def specs(case: Case) -> list[PointSpec]:
    drum = PointSpec(
        "drum", "saturated", TOL, "drum_p", case.cfg_ref, "drum_t", case.cfg_unit,
        case.cfg_t_unit,
    )  # fmt: skip
    out = [drum]
    if case.twin:
        out.append(
            PointSpec("twin", "saturated", TOL, "twin_p", "gauge", "drum_t", "Pa", case.cfg_t_unit)
        )
    return out


def run(case: Case, rng: random.Random):
    ss = specs(case)
    baro = BarometerReading(case.baro_seen, "tag", GOOD)
    window = EMPTY_WINDOW
    points = {}
    for raw, t, twin in trajectory(case, rng):
        snap = {
            "drum_p": Sample("drum_p", raw, GOOD, 0.0, 0.0),
            "drum_t": Sample("drum_t", t, GOOD, 0.0, 0.0),
            "twin_p": Sample("twin_p", twin, GOOD, 0.0, 0.0),
        }
        points, window = step(ss, snap, baro, window, properties=False)
    return points["drum"].hint


# ---------------------------------------------------------------- the noise-free oracle


def _effect_of(c: H.Candidate) -> tuple:
    return (c.reference, round(units.PRESSURE_UNITS[c.pressure_unit], 6), c.temperature_unit)


def truth_effect(case: Case) -> tuple:
    return (case.true_ref, round(units.PRESSURE_UNITS[case.true_unit], 6), case.true_t_unit)


def oracle(case: Case) -> tuple[str, set[tuple]]:
    """(class, effects of every candidate as good as the truth) from noise-free samples."""
    spec = specs(case)[0]
    ev = None
    samples = trajectory(case, None)
    baro = case.baro_seen
    for raw, t, _ in samples:
        ev = H.observe(spec, ev, raw, t, baro)
    assert ev is not None
    obs = ev.observations
    d = [o.d for o in obs]
    if any(math.isfinite(x) and abs(x) <= TOL for x in d):
        return "invisible", set()
    near_tolerance = any(math.isfinite(x) and abs(x) <= TOL + VISIBLE_MARGIN for x in d)
    cands = H.candidates(spec)
    true_eff = truth_effect(case)
    equal = set()
    span = 0.0
    for i, c in enumerate(cands):
        res = [o.residuals[i] for o in obs]
        if not all(math.isfinite(r) for r in res):
            continue
        worst = max(abs(r) for r in res)
        if _effect_of(c) == true_eff:
            exp = [o.expected[i] for o in obs]
            span = max(exp) - min(exp)
            equal.add(_effect_of(c))
        elif worst <= H.CLEAR * TOL:
            equal.add(_effect_of(c))
    impossible = not all(math.isfinite(x) for x in d)
    vouched = case.twin and case.cfg_t_unit == case.true_t_unit
    if near_tolerance:  # noise takes some samples back inside: the window may not fill
        return "borderline", equal
    if impossible or vouched:
        return "detectable", equal
    mean = sum(d) / len(d)
    spread = math.sqrt(sum((x - mean) ** 2 for x in d) / len(d))
    fit = H.FIT_RMS * TOL
    offset_out = abs(mean) > H.OFFSET_LIMIT + 1.0 or spread > MARGIN * fit
    offset_in = abs(mean) <= H.OFFSET_LIMIT - 1.0 and spread < fit / MARGIN
    coinc_out = span >= MARGIN * H.TRACK * TOL
    coinc_in = span < H.TRACK * TOL / MARGIN
    if offset_out and coinc_out:
        return "detectable", equal
    if offset_in or coinc_in:
        return "hidden", equal
    return "borderline", equal


def outcome(case: Case, hint, equal: set[tuple]) -> str:
    if hint is None or hint.fix is None:
        return "none"
    spec = specs(case)[0]
    by_fix = {(c.fix.tag, c.fix.setting): c for c in H.candidates(spec)}
    named = {_effect_of(by_fix[(f.tag, f.setting)]) for f in hint.fixes}
    truth = truth_effect(case)
    if truth in named:
        return "right" if equal <= named else "ambiguous-unnamed"
    if case.kind == "unit_reference":
        halves = {
            (case.true_ref, round(units.PRESSURE_UNITS[case.cfg_unit], 6), case.true_t_unit),
            (case.cfg_ref, round(units.PRESSURE_UNITS[case.true_unit], 6), case.true_t_unit),
        }
        if named & halves:
            return "partial"
    return "wrong"


MISTAKES = ("reference", "unit", "unit_reference", "temperature_unit")
HONEST = ("offset", "mislabel", "lag", "noise")

# The README's table (``--table``): mistake, the transmitter's truth, what the tag says.
TABLE_MISTAKES = (
    ("gauge read as absolute", ("bar", "gauge", "degC"), ("bar", "absolute", "degC")),
    ("absolute read as gauge", ("bar", "absolute", "degC"), ("bar", "gauge", "degC")),
    ("kg/cm2 read as bar", ("kg/cm2", "gauge", "degC"), ("bar", "gauge", "degC")),
    ("kg/cm2 g read as bar a", ("kg/cm2", "gauge", "degC"), ("bar", "absolute", "degC")),
    ("bar read as kPa", ("bar", "gauge", "degC"), ("kPa", "gauge", "degC")),
    ("kPa read as bar", ("kPa", "gauge", "degC"), ("bar", "gauge", "degC")),
    ("psi read as kPa", ("psi", "gauge", "degC"), ("kPa", "gauge", "degC")),
    ("bar read as psi", ("bar", "gauge", "degC"), ("psi", "gauge", "degC")),
    ("MPa read as bar", ("MPa", "gauge", "degC"), ("bar", "gauge", "degC")),
    ("degF read as degC", ("bar", "gauge", "degF"), ("bar", "gauge", "degC")),
)
TABLE_PRESSURES = (1e5, 3e5, 5e5, 10e5, 20e5, 27e5, 30e5, 40e5)  # Pa gauge


def table() -> str:
    """Markdown: for each mistake and drum pressure, the raw deviation it causes and what
    the samples need to show before the hint names it (tolerance 2 K, 101.325 kPa)."""
    head = "| mistake | " + " | ".join(f"{g / 1e5:g} barg" for g in TABLE_PRESSURES) + " |"
    lines = [head, "|---" * (len(TABLE_PRESSURES) + 1) + "|"]
    for label, (tu, tr, tt), (cu, cr, ct) in TABLE_MISTAKES:
        cells = []
        for g in TABLE_PRESSURES:
            cells.append(_cell(Case("t", "steady", False, g + 101_325.0, 101_325.0,
                                    101_325.0, tu, tr, cu, cr, tt, ct)))  # fmt: skip
        lines.append(f"| {label} | " + " | ".join(cells) + " |")
    return "\n".join(lines)


def _cell(case: Case) -> str:
    cls, _ = oracle(case)
    raw, t, _ = trajectory(case, None)[0]
    spec = specs(case)[0]
    d = H.observe(spec, None, raw, t, case.baro_seen).observations[0].d
    size = "impossible" if not math.isfinite(d) else f"{d:+.1f} K"
    if cls == "invisible" or (math.isfinite(d) and abs(d) <= TOL + VISIBLE_MARGIN):
        return f"{size}: not seen"
    if cls == "detectable":
        return f"{size}: at once"
    twin = "twin or " if case.cfg_t_unit == case.true_t_unit else ""
    for prof, swing in (("wander", "5"), ("swing", "20")):
        moved = Case(**{**case.__dict__, "profile": prof})
        if oracle(moved)[0] == "detectable":
            return f"{size}: {twin}+-{swing} %"
    return f"{size}: twin only" if twin else f"{size}: not told"


def main() -> int:
    global T_NOISE
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--cases", type=int, default=6000, help="mistake cases (honest: half)")
    ap.add_argument("--seed", type=int, default=13)
    ap.add_argument("--strict", action="store_true")
    ap.add_argument("--table", action="store_true", help="print the README's table and stop")
    ap.add_argument("--t-noise", type=float, default=T_NOISE, help="temperature noise, K RMS")
    args = ap.parse_args()
    T_NOISE = args.t_noise
    if args.table:
        print(table())
        return 0
    rng = random.Random(args.seed)
    started = time.perf_counter()
    tally: Counter[tuple[str, str, str]] = Counter()  # (kind, class, outcome)
    by_profile: Counter[tuple[str, str, str]] = Counter()
    n_honest = args.cases // 2
    extra = 0  # right, and naming more candidates than fit as well as the truth
    ambiguous = ambiguous_named = 0  # detectable cases where two or more fit as well
    for i in range(args.cases + n_honest):
        kind = MISTAKES[i % 4] if i < args.cases else HONEST[i % len(HONEST)]
        case = draw(rng, kind)
        hint = run(case, rng)
        if kind in MISTAKES:
            cls, equal = oracle(case)
            out = outcome(case, hint, equal)
            if out == "right" and len(hint.fixes) > len(equal):
                extra += 1
            if cls == "detectable" and len(equal) > 1:
                ambiguous += 1
                ambiguous_named += out == "right"
        else:
            cls, out = "honest", ("false-hint" if hint is not None and hint.fix else "quiet")
        tally[(kind, cls, out)] += 1
        by_profile[(f"{case.profile}{'+twin' if case.twin else ''}", cls, out)] += 1
    elapsed = time.perf_counter() - started

    def count(pred) -> int:
        return sum(v for k, v in tally.items() if pred(*k))

    print(f"hint bench: seed {args.seed}, {args.cases} mistakes, {n_honest} honest cases, "
          f"window {WINDOW}, tolerance {TOL} K, noise {T_NOISE} K / {P_NOISE:.2%}, "
          f"{elapsed:.1f} s")  # fmt: skip
    print(f"  {'mistake':<18}{'cases':>7}{'invisible':>10}{'hidden':>8}{'border':>8}"
          f"{'detect':>8}{'right':>8}{'wrong':>7}{'partial':>8}{'unnamed':>8}")  # fmt: skip
    for kind in MISTAKES:
        n = count(lambda k, c, o, kind=kind: k == kind)
        cls = {c: count(lambda k, cc, o, kind=kind, c=c: k == kind and cc == c)
               for c in ("invisible", "hidden", "borderline", "detectable")}  # fmt: skip
        det = cls["detectable"]
        right = count(lambda k, c, o, kind=kind: k == kind and c == "detectable" and o == "right")
        wrong = count(lambda k, c, o, kind=kind: k == kind and o == "wrong")
        partial = count(lambda k, c, o, kind=kind: k == kind and o == "partial")
        unnamed = count(lambda k, c, o, kind=kind: k == kind and o == "ambiguous-unnamed")
        print(f"  {kind:<18}{n:>7}{cls['invisible']:>10}{cls['hidden']:>8}"
              f"{cls['borderline']:>8}{det:>8}{_pct(right, det):>8}{_pct(wrong, n):>7}"
              f"{_pct(partial, n):>8}{_pct(unnamed, n):>8}")  # fmt: skip
    print(f"  {'honest case':<18}{'cases':>7}{'false hints':>14}")
    for kind in HONEST:
        n = count(lambda k, c, o, kind=kind: k == kind)
        f = count(lambda k, c, o, kind=kind: k == kind and o == "false-hint")
        print(f"  {kind:<18}{n:>7}{_pct(f, n):>14}")
    print(f"  {'by profile':<18}{'detect':>7}{'right':>8}{'hidden':>8}{'hidden hinted':>15}")
    for prof in sorted({k[0] for k in by_profile}):
        det = sum(v for (p, c, o), v in by_profile.items() if p == prof and c == "detectable")
        right = by_profile[(prof, "detectable", "right")]
        hid = sum(v for (p, c, o), v in by_profile.items() if p == prof and c == "hidden")
        hid_hint = sum(v for (p, c, o), v in by_profile.items()
                       if p == prof and c == "hidden" and o not in ("none",))  # fmt: skip
        print(f"  {prof:<18}{det:>7}{_pct(right, det):>8}{hid:>8}{_pct(hid_hint, hid):>15}")
    det = count(lambda k, c, o: k in MISTAKES and c == "detectable")
    right = count(lambda k, c, o: k in MISTAKES and c == "detectable" and o == "right")
    border = count(lambda k, c, o: c == "borderline")
    border_right = count(lambda k, c, o: c == "borderline" and o == "right")
    hidden_fix = count(lambda k, c, o: c == "hidden" and o not in ("none", "right"))
    n_mis = count(lambda k, c, o: k in MISTAKES)
    wrong = count(lambda k, c, o: k in MISTAKES and o == "wrong")
    partial = count(lambda k, c, o: k in MISTAKES and o == "partial")
    unnamed = count(lambda k, c, o: k in MISTAKES and o == "ambiguous-unnamed")
    false = count(lambda k, c, o: o == "false-hint")
    n_hon = count(lambda k, c, o: k in HONEST)
    print(f"  hit rate (right among detectable)   {_pct(right, det):>8}  ({right}/{det})")
    print(f"  borderline right                    {_pct(border_right, border):>8}  "
          f"({border_right}/{border})")  # fmt: skip
    print(f"  wrong-fix rate (all mistakes)       {_pct(wrong, n_mis):>8}  ({wrong}/{n_mis})")
    print(f"  partial rate (all mistakes)         {_pct(partial, n_mis):>8}  ({partial})")
    print(f"  ambiguous-but-unnamed rate          {_pct(unnamed, n_mis):>8}  ({unnamed})")
    print(f"  ambiguous detectable, all named     {_pct(ambiguous_named, ambiguous):>8}  "
          f"({ambiguous_named}/{ambiguous})")  # fmt: skip
    print(f"  right but naming an extra candidate {_pct(extra, right):>8}  ({extra})")
    print(f"  fixes on hidden mistakes (guesses)  {hidden_fix:>8}")
    print(f"  false-hint rate (honest cases)      {_pct(false, n_hon):>8}  ({false}/{n_hon})")
    goals = [
        ("right >= 95 % of detectable", right >= 0.95 * det),
        ("wrong fixes <= 0.5 %", wrong <= 0.005 * n_mis),
        ("false hints <= 0.5 %", false <= 0.005 * n_hon),
        ("no ambiguous case unnamed", unnamed == 0),
    ]
    for text, ok in goals:
        print(f"  {'PASS' if ok else 'MISS'}  {text}")
    return 1 if args.strict and not all(ok for _, ok in goals) else 0


def _pct(a: int, b: int) -> str:
    return f"{100.0 * a / b:.2f}%" if b else "-"


if __name__ == "__main__":
    sys.exit(main())
