"""Commissioning hints with evidence: which configuration mistake explains a saturated point
that disagrees with the steam tables, and only when the samples show it. Pure.

On a saturated point the measured temperature should equal Tsat at the measured pressure.
When it does not (the deviation exceeds the point's tolerance, or the pressure comes out
impossible), every sample goes into the point's :class:`Evidence` (``observe``), and
:func:`judge` replays the whole window under each candidate mistake:

* another pressure reference (gauge configured as absolute, vacuum read as gauge, ...);
* another pressure unit, every pair ``units.PRESSURE_UNITS`` knows (psi/kPa, bar/kPa,
  MPa/bar, kg/cm2/bar ...); both at once (unit *and* reference wrong);
* another temperature unit (degC, degF, K).

A candidate *fits* when, over every sample in the window, the corrected reading agrees
tightly: RMS of |T - Tsat| at most ``FIT_RMS`` x tolerance and no sample beyond
``FIT_MAX`` x tolerance, and ``BETTER`` times closer than the raw reading. Fitting is not
enough, because the same data may have an honest cause:

* **a steady temperature offset** (a lagging thermowell, a drifting sensor): a reference
  mistake shifts Tsat by a few kelvin, much as a sensor reading a few kelvin off does.
  The window rules that out when the raw deviation changes across the samples (a mistake's
  shift depends on the pressure, an offset does not), when it is larger than
  ``OFFSET_LIMIT``, when the raw pressure is impossible, or when another saturated point
  on the same temperature tag agrees with the steam tables (that tag reads right);
* **a coincidence**: a point that is not really saturated (a subcooled or superheated line
  configured as saturated) whose temperature happens to sit at the Tsat some mistake
  predicts. The window rules that out when the pressure has moved enough that the
  candidate's Tsat spans ``TRACK`` x tolerance and the temperature followed it, when the
  raw pressure is impossible, or when the temperature tag is vouched for as above.

With both ruled out the hint names the fix (two or more candidates within ``CLEAR`` x
tolerance of the best, or within the best's own RMS when the noise is larger: "either ...
or ...", every one named). With a fit but not the
evidence, or with a candidate within twice the fit limits but not inside them, the hint
says so and suggests no change (``undecided``); with nothing near, it says no
configuration mistake explains the deviation (``unexplained``: a sensor or process matter).
The window keeps the latest sample per 1 % band of raw pressure (so slow load changes
build evidence) and at least ``MIN_SAMPLES`` samples are needed. ``edge.derive.step``
keeps the window between passes; a sample back inside the tolerance clears it.

Fixes are written as the tag writes itself (``unit: barg`` on a tag whose unit carries
its reference, ``unit: bar, reference: gauge`` otherwise), so the changed config passes
``check``.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType

from edge import units
from edge.barometer import to_absolute as absolute
from edge.derive.spec import REFERENCES, TEMPERATURE_UNITS, PointSpec
from edge.errors import UnitError
from edge.model import Fix, Hint
from edge.steam import PSAT_MAX, PSAT_MIN, tsat_unchecked

__all__ = [
    "EMPTY_WINDOW",
    "Candidate",
    "Evidence",
    "Observation",
    "Window",
    "candidates",
    "judge",
    "observe",
]

FIT_RMS = 0.2  # x tolerance: RMS of the corrected |T - Tsat| over the window
FIT_MAX = 0.5  # x tolerance: no corrected sample further off than this
BETTER = 4.0  # the corrected RMS at least this many times below the smallest raw deviation
CLEAR = 0.1  # x tolerance: candidates within this RMS of the best are named beside it
TRACK = 0.6  # x tolerance: the candidate's Tsat must span this much over the window
OFFSET_LIMIT = 15.0  # K: a steady offset beyond this is no sensor that still follows
MIN_SAMPLES = 5  # deviating samples in a row before any hint
MAX_OBSERVATIONS = 32  # pressure bands kept
BAND = 0.01  # width of a pressure band (1 % of the raw reading)

_SUFFIX = {"gauge": "g", "absolute": "a", "vacuum": " vac"}


@dataclass(frozen=True, slots=True)
class Candidate:
    """One configuration the point's tags might really have."""

    reference: str
    pressure_unit: str
    temperature_unit: str
    fix: Fix
    clause: str  # "drum_p reads gauge pressure, not absolute"
    subject: str  # "temperature" (a pressure change) or "pressure" (a temperature change)
    code: str  # reference | unit | unit_reference | temperature_unit


@dataclass(frozen=True, slots=True)
class Observation:
    """One deviating sample, replayed under every candidate once when it arrives."""

    raw: float  # the pressure tag's value (Pa, in its configured reference and unit)
    t: float  # K, as configured
    baro: float  # Pa (NaN without one)
    d: float  # T - Tsat as configured (NaN: no Tsat at that pressure)
    residuals: tuple[float, ...]  # per candidate: T' - Tsat(p') (inf: impossible)
    expected: tuple[float, ...]  # per candidate: Tsat(p') (K)


@dataclass(frozen=True, slots=True)
class Evidence:
    """What a point has shown while outside its tolerance: how many samples in a row,
    and the latest per pressure band."""

    seen: int
    observations: tuple[Observation, ...]


Window = Mapping[str, Evidence]
EMPTY_WINDOW: Window = MappingProxyType({})


@functools.lru_cache(maxsize=4096)
def candidates(spec: PointSpec) -> tuple[Candidate, ...]:
    """Every other configuration of the point's tags worth replaying, without duplicates
    (hPa and mbar, mmHg and Torr are one factor: the first listed speaks for both)."""
    out: list[Candidate] = []
    seen: list[tuple[str, float]] = []
    p_unit = spec.pressure_unit if spec.pressure_unit in units.PRESSURE_UNITS else "Pa"
    own = units.PRESSURE_UNITS[p_unit]
    tag = spec.pressure_tag
    for reference in REFERENCES:
        for unit, factor in units.PRESSURE_UNITS.items():
            if _same(factor, own) and reference == spec.reference:
                continue
            if any(r == reference and _same(f, factor) for r, f in seen):
                continue
            seen.append((reference, factor))
            unit_changed = not _same(factor, own)
            setting = _pressure_setting(spec, reference, unit, unit_changed)
            if not unit_changed:
                clause = f"{tag} reads {reference} pressure, not {spec.reference}"
            elif reference == spec.reference:
                clause = f"{tag} is in {unit}, not {p_unit}"
            else:
                clause = (
                    f"{tag} reads {reference} pressure in {unit}, not {spec.reference} in {p_unit}"
                )
            if not unit_changed:
                code = "reference"
            else:
                code = "unit" if reference == spec.reference else "unit_reference"
            fix = Fix(tag, setting)
            out.append(
                Candidate(reference, unit, spec.temperature_unit, fix, clause, "temperature", code)
            )
    t_unit = spec.temperature_unit
    if spec.temperature_tag is not None and t_unit in TEMPERATURE_UNITS:
        for unit in TEMPERATURE_UNITS:
            if unit != t_unit:
                out.append(
                    Candidate(
                        spec.reference,
                        p_unit,
                        unit,
                        Fix(spec.temperature_tag, f"unit: {unit}"),
                        f"{spec.temperature_tag} is in {unit}, not {t_unit}",
                        "pressure",
                        "temperature_unit",
                    )
                )
    return tuple(out)


def _same(a: float, b: float) -> bool:
    return abs(a - b) <= 1e-6 * max(abs(a), abs(b))


def _pressure_setting(spec: PointSpec, reference: str, unit: str, unit_changed: bool) -> str:
    """The change as the tag writes itself: one ``unit`` with its suffix when the tag's unit
    carries its reference, else ``unit`` and/or ``reference`` keys."""
    if spec.unit_has_reference:
        return f"unit: {unit}{_SUFFIX[reference]}"
    parts = []
    if unit_changed:
        parts.append(f"unit: {unit}")
    if reference != spec.reference:
        parts.append(f"reference: {reference}")
    return ", ".join(parts)


def _tsat(p: float) -> float:
    """Tsat (K), NaN where there is none (off the saturation line, not a number)."""
    if PSAT_MIN <= p <= PSAT_MAX:
        return tsat_unchecked(p)
    return math.nan


def observe(
    spec: PointSpec, evidence: Evidence | None, raw: float, t: float, baro: float
) -> Evidence:
    """The point's evidence with one more deviating sample: ``raw`` is the pressure tag's
    value (Pa, in its configured reference and unit), ``t`` the temperature (K, as
    configured), ``baro`` the barometric pressure in use (Pa; NaN if none)."""
    cands = candidates(spec)
    p_unit = spec.pressure_unit if spec.pressure_unit in units.PRESSURE_UNITS else "Pa"
    number = raw / units.PRESSURE_UNITS[p_unit]
    p_own = absolute(raw, spec.reference, baro)
    ts_own = _tsat(p_own)
    residuals: list[float] = []
    expected: list[float] = []
    t_number = _from_k(t, spec.temperature_unit)
    for c in cands:
        if c.subject == "temperature":
            if c.reference != "absolute" and not math.isfinite(baro):
                residuals.append(math.inf)
                expected.append(math.nan)
                continue
            ts = _tsat(absolute(number * units.PRESSURE_UNITS[c.pressure_unit], c.reference, baro))
            tc = t
        else:
            ts = ts_own
            tc = _to_k(t_number, c.temperature_unit)
        residuals.append(tc - ts if math.isfinite(ts) and math.isfinite(tc) else math.inf)
        expected.append(ts)
    obs = Observation(raw, t, baro, t - ts_own, tuple(residuals), tuple(expected))
    key = _band(raw)
    kept = [] if evidence is None else [o for o in evidence.observations if _band(o.raw) != key]
    kept.append(obs)
    if len(kept) > MAX_OBSERVATIONS:
        del kept[0]
    return Evidence((evidence.seen if evidence is not None else 0) + 1, tuple(kept))


def _band(raw: float) -> int:
    return round(math.log1p(abs(raw)) / BAND) if math.isfinite(raw) else 0


def _from_k(t: float, unit: str) -> float:
    try:
        return units.from_si(t, unit, "temperature")
    except UnitError:
        return math.nan


def _to_k(x: float, unit: str) -> float:
    try:
        return units.to_si(x, unit, "temperature")
    except UnitError:
        return math.nan


@dataclass(frozen=True, slots=True)
class _Fit:
    rms: float
    worst: float
    span: float  # K spanned by the candidate's Tsat over the window
    candidate: Candidate


def judge(
    spec: PointSpec, evidence: Evidence, *, t_vouched: bool = False, p_vouched: bool = False
) -> Hint | None:
    """The hint the evidence supports, or None while there are fewer than MIN_SAMPLES.
    ``t_vouched``/``p_vouched``: another saturated point on the same temperature/pressure
    tag agrees with the steam tables this pass (that tag reads right). Never raises."""
    try:
        return _judge(spec, evidence, t_vouched, p_vouched)
    except (ArithmeticError, ValueError):  # a hint must never break evaluation
        return None


def _judge(spec: PointSpec, ev: Evidence, t_vouched: bool, p_vouched: bool) -> Hint | None:
    tol = spec.tolerance
    if ev.seen < MIN_SAMPLES or not (math.isfinite(tol) and tol > 0.0):
        return None
    obs = ev.observations
    n = len(obs)
    raw_d = [o.d for o in obs]
    impossible = not all(math.isfinite(d) for d in raw_d)
    smallest = min((abs(d) if math.isfinite(d) else math.inf for d in raw_d), default=math.inf)
    fit_rms, fit_max = FIT_RMS * tol, FIT_MAX * tol
    scored: list[_Fit] = []  # every candidate with a finite residual, far better than raw
    for i, c in enumerate(candidates(spec)):
        if (p_vouched and c.subject == "temperature") or (t_vouched and c.subject == "pressure"):
            continue
        res = [o.residuals[i] for o in obs]
        worst = max(abs(r) for r in res)
        if not worst < math.inf:
            continue
        rms = math.sqrt(sum(r * r for r in res) / n)
        if BETTER * rms <= smallest:
            exp = [o.expected[i] for o in obs]
            scored.append(_Fit(rms, worst, max(exp) - min(exp), c))
    fits = [f for f in scored if f.rms <= fit_rms and f.worst <= fit_max]
    point = spec.name
    if not fits:
        near = sorted(
            (f for f in scored if f.rms <= 2.0 * fit_rms and f.worst <= 2.0 * fit_max),
            key=lambda f: f.rms,
        )
        if near:  # close, but not tight: say so rather than "no mistake explains it"
            return Hint(
                "undecided",
                f"{point}: "
                + " or ".join(_clause_with_fix(f.candidate) for f in near)
                + " would nearly explain the samples, but they scatter too much to tell: "
                "no change is suggested",
                None,
                tuple(f.candidate.fix for f in near),
                0.0,
            )
        return _unexplained(spec, raw_d, impossible)
    fits.sort(key=lambda f: (f.rms, _changes(f.candidate)))
    best = fits[0]
    # as good as the best (within CLEAR x tolerance, or within the best's own scatter when
    # the noise is larger), whether or not it passes the tight fit itself
    margin = best.rms + max(CLEAR * tol, best.rms)
    named = sorted(
        (f for f in scored if f.rms <= margin), key=lambda f: (f.rms, _changes(f.candidate))
    )
    offset_ruled_out = t_vouched or impossible or _offset_fails(raw_d, fit_rms)
    coincidence_ruled_out = t_vouched or impossible or all(f.span >= TRACK * tol for f in named)
    if not (offset_ruled_out and coincidence_ruled_out):
        why = []
        if not offset_ruled_out:
            why.append("a steady temperature offset (sensor, thermowell)")
        if not coincidence_ruled_out:
            why.append("a point that is not really saturated")
        d = sum(raw_d) / n
        return Hint(
            "undecided",
            f"{point} reads {abs(d):.1f} K {'above' if d > 0 else 'below'} Tsat; "
            + " or ".join(_clause_with_fix(f.candidate) for f in named)
            + f" would explain it, but so would {' or '.join(why)}: no change is suggested "
            "until the pressure moves or another point on the same temperature tag agrees",
            None,
            tuple(f.candidate.fix for f in named),
            0.0,
        )
    quality = max(0.0, 1.0 - best.rms / fit_rms)
    if len(named) == 1:
        c = best.candidate
        others = [f.rms for f in scored if f is not best]
        runner_up = min(others) if others else fit_rms * 2.0
        margin = min(1.0, (runner_up - best.rms) / fit_rms)
        return Hint(
            c.code,
            f"the {c.subject} agrees if {c.clause}: set {c.fix.setting}",
            c.fix,
            (),
            round(0.5 + 0.5 * quality * margin, 3),
        )
    return Hint(
        "either",
        "either "
        + " or ".join(_clause_with_fix(f.candidate) for f in named)
        + f": each fits every sample so far ({n}); check the transmitter's nameplate",
        best.candidate.fix,
        tuple(f.candidate.fix for f in named[1:]),
        round(0.5 * quality / len(named), 3),
    )


def _clause_with_fix(c: Candidate) -> str:
    return f"{c.clause} (set {c.fix.setting})"


def _changes(c: Candidate) -> int:
    return c.fix.setting.count(":")


def _offset_fails(raw_d: list[float], fit_rms: float) -> bool:
    """Whether a steady temperature offset cannot explain the raw deviations: too large for
    a sensor that still follows the process, or not steady across the window."""
    n = len(raw_d)
    mean = sum(raw_d) / n
    if abs(mean) > OFFSET_LIMIT:
        return True
    spread = math.sqrt(sum((d - mean) ** 2 for d in raw_d) / n)
    return spread > fit_rms


def _unexplained(spec: PointSpec, raw_d: list[float], impossible: bool) -> Hint:
    if impossible:
        what = "its pressure has no saturation temperature"
    else:
        d = sum(raw_d) / len(raw_d)
        what = f"it reads {abs(d):.1f} K {'above' if d > 0 else 'below'} Tsat"
    ttag = spec.temperature_tag or "the temperature"
    return Hint(
        "unexplained",
        f"no configuration mistake explains {spec.name}: {what}; a sensor or process "
        f"matter (check {spec.pressure_tag}, {ttag} and its thermowell, and whether "
        f"{spec.name} is really saturated)",
    )
