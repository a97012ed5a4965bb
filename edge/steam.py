"""IAPWS-IF97 for the monitor: saturation, single-phase properties, validity range. Pure.

Everything is SI in and out: Pa, K, J/kg, J/(kg K), m3/kg, kg/m3.

The engine is ``iapws`` (IAPWS-IF97, R7-97 2012):

* saturation pressure: R7-97 equation 30 with the Table 34 coefficients, written out here
  term for term as iapws's ``_PSat_T`` writes it, so the two agree to the last bit (tests
  hold them to it along the whole line);
* saturation temperature: R7-97 equation 31 with the Table 34 coefficients, written out
  here with ``math.sqrt`` because derive calls it for every point on every tick: 0.55 us
  against 0.9 us for ``iapws.iapws97._TSat_P``, which tests hold it to (1e-13 relative,
  whole line);
* regions 1 and 2, the states a boiler house actually sees, are evaluated here with the
  same Gibbs equations (R7-97 equations 7 and 15-16) and **iapws's own coefficient
  tables**, as plain scalar Python that computes only what the monitor uses (gamma and its
  first derivatives plus gamma_tau_tau for cp). That is about 6x faster than iapws's numpy
  versions, which also compute cv, w, alpha_v and kappa_T; tests pin the two together to
  1e-12 and to R7-97 Tables 5 and 15;
* region 3 (near and above the critical point, T 623.15 K .. B23, p > 16.53 MPa):
  iapws's backward equation v(p, T) (IAPWS SR5) as the start, refined with Newton steps on
  iapws ``_Region3(rho, T)`` until p matches to 1e-12, so results are those of the basic
  equation (R7-97 Table 33), not of the backward approximation;
* region 5 (1073.15 .. 2273.15 K, p <= 50 MPa): iapws ``_Region5`` (R7-97 Table 42).

Resident memory: importing ``iapws`` loads numpy and scipy (+64 MiB on a small edge PC),
yet a boiler house lives in regions 1 and 2. So the region 1/2 coefficient tables are read
from iapws's own constants file as text (``ast.literal_eval`` of its array literals, no
numpy), and ``iapws.iapws97`` is imported only the first time a state in region 3 or 5 is
asked for (a one-off pause of about half a second, then the same results as before).

Validity (R7-97 section 4): 273.15 K <= T <= 1073.15 K for 0 < p <= 100 MPa, and
1073.15 K < T <= 2273.15 K for 0 < p <= 50 MPa; here p starts at 1 Pa (``P_MIN``), where
IF97's 1/p terms are still far from overflowing. Outside that, and for any input that is not
a finite number, the functions raise :class:`edge.errors.OutsideIF97`; nothing is
extrapolated (iapws itself would return NaN for a NaN input, silently).

The saturation line is 273.15 K .. 647.096 K, 611.213 Pa .. 22.064 MPa.

Two-phase: (p, T) fixes a state only off the saturation line. :func:`properties` raises
:class:`edge.errors.TwoPhaseState` when ``|T - Tsat(p)| <= TWO_PHASE_TOLERANCE`` (1e-6 K).
That band is wide enough to cover the rounding of the saturation equation and the IF97
region boundary (Tsat(psat(T)) round-trips to better than 1e-9 K), and narrow enough never
to swallow a real measurement: no transmitter resolves a microkelvin. Use
:func:`saturated`, :func:`saturated_liquid` or :func:`saturated_vapour` for states on the
line.
"""

from __future__ import annotations

import ast
import contextlib
import importlib
import importlib.util
import math
from dataclasses import dataclass
from functools import cache
from pathlib import Path
from types import ModuleType
from typing import Any

from edge.errors import OutsideIF97, TwoPhaseState

__all__ = [
    "PSAT_MAX",
    "PSAT_MIN",
    "P_CRITICAL",
    "P_MAX",
    "P_MIN",
    "TWO_PHASE_TOLERANCE",
    "T_CRITICAL",
    "T_MIN",
    "Properties",
    "Saturation",
    "properties",
    "properties_hsv",
    "psat",
    "region",
    "saturated",
    "saturated_liquid",
    "saturated_vapour",
    "saturated_vapour_hsv",
    "tsat",
    "tsat_unchecked",
]

R = 461.526  # J/(kg K), specific gas constant of IF97
T_MIN = 273.15  # K
T_MAX = 1073.15  # K, regions 1-3
T_MAX5 = 2273.15  # K, region 5
P_MAX = 100e6  # Pa, regions 1-3
P_MIN = 1.0  # Pa: IF97 says p > 0; below 1 Pa its 1/p terms overflow, and no plant goes there
P_MAX5 = 50e6  # Pa, region 5
T_CRITICAL = 647.096  # K
P_CRITICAL = 22.064e6  # Pa
T_13 = 623.15  # K, boundary between regions 1 and 3

# R7-97 Table 34, n1 .. n10 (n[0] unused, so the indices are the table's)
_N34 = (
    0.0,
    0.11670521452767e04,
    -0.72421316703206e06,
    -0.17073846940092e02,
    0.12020824702470e05,
    -0.32325550322333e07,
    0.14915108613530e02,
    -0.48232657361591e04,
    0.40511340542057e06,
    -0.23855557567849e00,
    0.65017534844798e03,
)


def _psat_mpa(t: float) -> float:
    """R7-97 equation 30 (MPa at T in K), the operations in iapws's ``_PSat_T`` order."""
    n = _N34
    tita = t + n[9] / (t - n[10])
    a = tita**2 + n[1] * tita + n[2]
    b = n[3] * tita**2 + n[4] * tita + n[5]
    c = n[6] * tita**2 + n[7] * tita + n[8]
    return float((2 * c / (-b + (b**2 - 4 * a * c) ** 0.5)) ** 4)


# Ends of the saturation line as equation 30 gives them, so tsat accepts every psat output:
PSAT_MIN = _psat_mpa(T_MIN) * 1e6  # Pa, 611.212677 Pa
PSAT_MAX = _psat_mpa(T_CRITICAL) * 1e6  # Pa, 22.064 MPa (+3e-4 Pa of rounding)
PSAT_623 = _psat_mpa(T_13) * 1e6  # Pa, 16.5291643 MPa: saturation line meets region 3
TWO_PHASE_TOLERANCE = 1e-6  # K


@dataclass(frozen=True, slots=True)
class Properties:
    """Single-phase properties at one state (SI)."""

    h: float  # J/kg
    s: float  # J/(kg K)
    v: float  # m3/kg
    density: float  # kg/m3
    cp: float  # J/(kg K)
    region: int  # IF97 region: 1 liquid, 2 vapour, 3 near-critical, 5 high temperature


@dataclass(frozen=True, slots=True)
class Saturation:
    """Saturated liquid (f) and vapour (g) at one pressure (SI)."""

    tsat: float  # K
    hf: float  # J/kg
    hg: float
    hfg: float
    vf: float  # m3/kg
    vg: float
    sf: float  # J/(kg K)
    sg: float

    @property
    def density_f(self) -> float:
        return 1.0 / self.vf

    @property
    def density_g(self) -> float:
        return 1.0 / self.vg


# ---------------------------------------------------------------- saturation line


def tsat(p_pa: float) -> float:
    """Saturation temperature (K) at an absolute pressure (Pa). R7-97 equation 31."""
    if not math.isfinite(p_pa):
        raise OutsideIF97(f"pressure {p_pa!r} Pa is not a finite number")
    if not PSAT_MIN <= p_pa <= PSAT_MAX:
        raise OutsideIF97(
            f"no saturation temperature at {p_pa:g} Pa: the saturation line runs from "
            f"{PSAT_MIN:g} Pa to {P_CRITICAL:g} Pa"
        )
    return tsat_unchecked(p_pa)


_sqrt = math.sqrt


def tsat_unchecked(p_pa: float) -> float:
    """:func:`tsat` for a caller that has already checked PSAT_MIN <= p_pa <= PSAT_MAX
    (derive's hot path); outside that range the result is meaningless. R7-97 equation 31,
    coefficients n1..n10 of Table 34."""
    beta = _sqrt(_sqrt(p_pa * 1e-6))
    b2 = beta * beta
    e = b2 - 0.17073846940092e2 * beta + 0.14915108613530e2
    f = 0.11670521452767e4 * b2 + 0.12020824702470e5 * beta - 0.48232657361591e4
    g = -0.72421316703206e6 * b2 - 0.32325550322333e7 * beta + 0.40511340542057e6
    d = 2.0 * g / (-f - _sqrt(f * f - 4.0 * e * g))
    a = 0.65017534844798e3 + d
    return 0.5 * (a - _sqrt(a * a - 4.0 * (-0.23855557567849 + 0.65017534844798e3 * d)))


def psat(t_k: float) -> float:
    """Saturation pressure (Pa) at a temperature (K). R7-97 equation 30."""
    if not math.isfinite(t_k):
        raise OutsideIF97(f"temperature {t_k!r} K is not a finite number")
    if not T_MIN <= t_k <= T_CRITICAL:
        raise OutsideIF97(
            f"no saturation pressure at {t_k:g} K: the saturation line runs from "
            f"{T_MIN:g} K to {T_CRITICAL:g} K"
        )
    return _psat_mpa(t_k) * 1e6


# ---------------------------------------------------------------- iapws, as needed


@cache
def _iapws97() -> ModuleType:
    """``iapws.iapws97`` (regions 3 and 5), imported the first time it is needed."""
    return importlib.import_module("iapws.iapws97")


_TABLES = (
    "Region1_n",
    "Region1_Li",
    "Region1_Lj",
    "Region2_n",
    "Region2_Li",
    "Region2_Lj",
    "Region2_cp0_no",
    "Region2_cp0_Jo",
)


def _iapws_tables() -> dict[str, list[Any]]:
    """The region 1/2 coefficient tables of iapws's ``_iapws97Constants``, read from its
    source text (each is ``name = np.array([...])``) without importing iapws. Should a
    release write them differently, the module is imported instead: same numbers."""
    spec = importlib.util.find_spec("iapws")  # a top-level name: finds, does not import
    found: dict[str, list[Any]] = {}
    if spec is not None and spec.submodule_search_locations:
        path = Path(next(iter(spec.submodule_search_locations))) / "_iapws97Constants.py"
        try:
            tree = ast.parse(path.read_text(encoding="utf-8"))
        except (OSError, SyntaxError, ValueError):
            tree = ast.Module(body=[], type_ignores=[])
        for node in tree.body:
            if not (isinstance(node, ast.Assign) and len(node.targets) == 1):
                continue
            target, value = node.targets[0], node.value
            if (
                isinstance(target, ast.Name)
                and target.id in _TABLES
                and isinstance(value, ast.Call)
                and len(value.args) == 1
            ):
                with contextlib.suppress(ValueError):
                    found[target.id] = list(ast.literal_eval(value.args[0]))
    if set(found) != set(_TABLES):
        constants = importlib.import_module("iapws._iapws97Constants")
        found = {name: list(getattr(constants, name)) for name in _TABLES}
    return found


# ---------------------------------------------------------------- regions 1 and 2
# Coefficient tables come from iapws; converted once to plain Python numbers.


def _terms(n: object, i: object, j: object) -> tuple[tuple[float, int, int, int], ...]:
    """(n, I, J, J(J-1)) per term, as Python numbers (numpy scalars are slow one by one)."""
    return tuple(
        (float(nn), int(ii), int(jj), int(jj) * (int(jj) - 1))
        for nn, ii, jj in zip(n, i, j, strict=True)
    )


_T = _iapws_tables()
_R1 = _terms(_T["Region1_n"], _T["Region1_Li"], _T["Region1_Lj"])
_R2 = _terms(_T["Region2_n"], _T["Region2_Li"], _T["Region2_Lj"])
_R2_IDEAL = tuple(
    (float(n), int(j), int(j) * (int(j) - 1))
    for n, j in zip(_T["Region2_cp0_no"], _T["Region2_cp0_Jo"], strict=True)
)
del _T


def _sums_source(
    name: str, terms: tuple[tuple[float, int, int, int], ...], second: bool = True
) -> str:
    """Python source of ``name(x, y) -> (g, gx, gy, gyy)`` for g = sum n x^I y^J, with
    gx = sum I n x^I y^J, gy = sum J n x^I y^J, gyy = sum J(J-1) n x^I y^J (``second``
    False: ``(g, gx, gy)``, for h, s and v without cp, each sum made as with it): the sums the
    loops over the table would make, written out straight with the coefficients as
    literals and the terms grouped by I, each power taken once. This runs for every point
    of a full scrape (5,000 at 10,000 tags), where a loop over the 43 terms of region 2
    with two powers each costs about three times as much."""
    by_i: dict[int, list[tuple[float, int, int]]] = {}
    for n, i, j, jj in terms:
        by_i.setdefault(i, []).append((n, j, jj))

    def power(var: str, k: int) -> str:
        return "1.0" if k == 0 else var if k == 1 else f"{var}{k}".replace("-", "m")

    lines = [f"def {name}(x, y):"]
    for j in sorted({j for _, _, j, _ in terms} - {0, 1}):
        lines.append(f"    {power('y', j)} = y ** {j}")
    for i in sorted(set(by_i) - {0, 1}):
        lines.append(f"    {power('x', i)} = x ** {i}")
    g, gx, gy, gyy = [], [], [], []
    for i, group in sorted(by_i.items()):
        s0 = " + ".join(f"{n!r} * {power('y', j)}" for n, j, _ in group)
        s1 = " + ".join(f"{n * j!r} * {power('y', j)}" for n, j, _ in group if j) or "0.0"
        s2 = " + ".join(f"{n * jj!r} * {power('y', j)}" for n, j, jj in group if jj) or "0.0"
        lines += [f"    s0_{i} = {s0}", f"    s1_{i} = {s1}"]
        if second:
            lines.append(f"    s2_{i} = {s2}")
        xi = power("x", i)
        g.append(f"{xi} * s0_{i}")
        if i:
            gx.append(f"{float(i)!r} * {xi} * s0_{i}")
        gy.append(f"{xi} * s1_{i}")
        gyy.append(f"{xi} * s2_{i}")
    sums = [("g", g), ("gx", gx), ("gy", gy), ("gyy", gyy)][: 4 if second else 3]
    for label, parts in sums:
        lines.append(f"    {label} = " + (" + ".join(parts) or "0.0"))
    lines.append("    return " + ", ".join(label for label, _ in sums))
    return "\n".join(lines) + "\n"


def _compile_sums(
    name: str, terms: tuple[tuple[float, int, int, int], ...], second: bool = True
) -> Any:
    scope: dict[str, Any] = {}
    exec(compile(_sums_source(name, terms, second), f"<edge.steam {name}>", "exec"), scope)
    return scope[name]


_r1_sums = _compile_sums("_r1_sums", _R1)
_r2_sums = _compile_sums("_r2_sums", _R2)
_R2_IDEAL_TERMS = tuple((n, 0, j, jj) for n, j, jj in _R2_IDEAL)
_r2_ideal_sums = _compile_sums("_r2_ideal_sums", _R2_IDEAL_TERMS)
# without the second derivative (cp): what a full scrape needs, h s v of every point
_r1_sums3 = _compile_sums("_r1_sums3", _R1, second=False)
_r2_sums3 = _compile_sums("_r2_sums3", _R2, second=False)
_r2_ideal_sums3 = _compile_sums("_r2_ideal_sums3", _R2_IDEAL_TERMS, second=False)


def _region1(p: float, t: float) -> tuple[float, float, float, float]:
    """Region 1 (liquid) at p (Pa), T (K): (h J/kg, s J/(kg K), v m3/kg, cp J/(kg K))."""
    pi = p / 16.53e6
    tau = 1386.0 / t
    a = 7.1 - pi
    b = tau - 1.222
    g, gp, gt, gtt = _r1_sums(a, b)
    gp = -gp / a
    gt /= b
    gtt /= b * b
    rt = R * t
    return rt * tau * gt, R * (tau * gt - g), rt * pi * gp / p, -R * tau * tau * gtt


def _region2(p: float, t: float) -> tuple[float, float, float, float]:
    """Region 2 (vapour) at p (Pa), T (K): (h J/kg, s J/(kg K), v m3/kg, cp J/(kg K))."""
    pi = p / 1e6
    tau = 540.0 / t
    g0, _, g0t, g0tt = _r2_ideal_sums(1.0, tau)
    g0 += math.log(pi)
    g0t /= tau
    g0tt /= tau * tau
    b = tau - 0.5
    gr, grp, grt, grtt = _r2_sums(pi, b)
    grp /= pi
    grt /= b
    grtt /= b * b
    rt = R * t
    gtau = g0t + grt
    return (
        rt * tau * gtau,
        R * (tau * gtau - g0 - gr),
        rt * (1.0 + pi * grp) / p,
        -R * tau * tau * (g0tt + grtt),
    )


def _region1_hsv(p: float, t: float) -> tuple[float, float, float]:
    """:func:`_region1` without cp, the same operations for h, s and v (same results)."""
    pi = p / 16.53e6
    tau = 1386.0 / t
    a = 7.1 - pi
    b = tau - 1.222
    g, gp, gt = _r1_sums3(a, b)
    gp = -gp / a
    gt /= b
    rt = R * t
    return rt * tau * gt, R * (tau * gt - g), rt * pi * gp / p


def _region2_hsv(p: float, t: float) -> tuple[float, float, float]:
    """:func:`_region2` without cp, the same operations for h, s and v (same results)."""
    pi = p / 1e6
    tau = 540.0 / t
    g0, _, g0t = _r2_ideal_sums3(1.0, tau)
    g0 += math.log(pi)
    g0t /= tau
    b = tau - 0.5
    gr, grp, grt = _r2_sums3(pi, b)
    grp /= pi
    grt /= b
    rt = R * t
    gtau = g0t + grt
    return rt * tau * gtau, R * (tau * gtau - g0 - gr), rt * (1.0 + pi * grp) / p


# ---------------------------------------------------------------- regions 3 and 5


def _from_iapws(r: dict[str, float], region_no: int) -> Properties:
    v = float(r["v"])
    return Properties(
        h=float(r["h"]) * 1e3,
        s=float(r["s"]) * 1e3,
        v=v,
        density=1.0 / v,
        cp=float(r["cp"]) * 1e3,
        region=region_no,
    )


def _region3(p: float, t: float, v_start: float) -> Properties:
    """Region 3 at (p, T): Newton on p(rho, T) = p from the backward-equation volume."""
    p_mpa = p / 1e6
    rho = 1.0 / v_start
    best: tuple[float, dict[str, float]] | None = None
    for _ in range(50):
        r = _iapws97()._Region3(rho, t)
        dp = p_mpa - float(r["P"])
        if abs(dp) <= 1e-12 * p_mpa:
            return _from_iapws(r, 3)
        if best is None or abs(dp) < best[0]:
            best = (abs(dp), r)
        step = dp * rho * float(r["kt"])
        # keep each step modest so it cannot jump to the other phase near the critical point
        rho += max(-0.1 * rho, min(0.1 * rho, step))
    # Within a few pascal of the critical point the isotherm is so flat that p cannot pin
    # rho to 1e-12; a state whose pressure is right to 1e-9 (0.02 Pa) is as good as any.
    if best is not None and best[0] <= 1e-9 * p_mpa:
        return _from_iapws(best[1], 3)
    raise OutsideIF97(f"no converged region 3 state at {p:g} Pa, {t:g} K (too near critical)")


def _t_b23(p: float) -> float:
    """B23 boundary temperature (K) at p (Pa), R7-97 equation 6."""
    return 572.54459862746 + math.sqrt((p / 1e6 - 13.91883977870) / 1.0192970039326e-3)


# ---------------------------------------------------------------- public API


def _check_inputs(p: float, t: float) -> None:
    if not (math.isfinite(p) and math.isfinite(t)):
        raise OutsideIF97(f"state ({p!r} Pa, {t!r} K) is not a pair of finite numbers")
    if p < P_MIN:
        raise OutsideIF97(f"pressure {p:g} Pa is below {P_MIN:g} Pa absolute")
    if t < T_MIN or t > T_MAX5:
        raise OutsideIF97(f"temperature {t:g} K is outside IF97 ({T_MIN:g} .. {T_MAX5:g} K)")
    if t > T_MAX and p > P_MAX5:
        raise OutsideIF97(f"above {T_MAX:g} K IF97 ends at {P_MAX5:g} Pa; got {p:g} Pa")
    if p > P_MAX:
        raise OutsideIF97(f"pressure {p:g} Pa is above the IF97 limit of {P_MAX:g} Pa")


def _two_phase(p: float, t: float, ts: float) -> TwoPhaseState:
    return TwoPhaseState(
        f"{t:.6f} K at {p:g} Pa lies on the saturation line (Tsat {ts:.6f} K): pressure and "
        "temperature do not fix the phase"
    )


def region(p_pa: float, t_k: float) -> int:
    """The IF97 region (1, 2, 3 or 5) of a single-phase state; raises like :func:`properties`."""
    _check_inputs(p_pa, t_k)
    return _region(p_pa, t_k, None)


def _region(p_pa: float, t_k: float, ts: float | None) -> int:
    """:func:`region` of checked inputs; ``ts``: ``tsat_unchecked(p_pa)`` when the caller has
    it (p on the saturation line), else None."""
    if t_k > T_MAX:
        return 5
    if p_pa <= PSAT_623:
        if p_pa < PSAT_MIN:
            return 2  # below the triple-point pressure every state with T >= 273.15 K is vapour
        if ts is None:
            ts = tsat_unchecked(p_pa)
        if abs(t_k - ts) <= TWO_PHASE_TOLERANCE:
            raise _two_phase(p_pa, t_k, ts)
        return 1 if t_k < ts else 2
    if t_k <= T_13:
        return 1
    if t_k < _t_b23(p_pa):
        if p_pa <= PSAT_MAX:
            if ts is None:
                ts = tsat_unchecked(p_pa)
            if abs(t_k - ts) <= TWO_PHASE_TOLERANCE:
                raise _two_phase(p_pa, t_k, ts)
        return 3
    return 2


def properties(p_pa: float, t_k: float) -> Properties:
    """Single-phase properties at absolute pressure ``p_pa`` (Pa) and ``t_k`` (K).

    Raises OutsideIF97 outside the IF97 range and TwoPhaseState on the saturation line.
    """
    reg = region(p_pa, t_k)
    if reg == 1:
        h, s, v, cp = _region1(p_pa, t_k)
    elif reg == 2:
        h, s, v, cp = _region2(p_pa, t_k)
    elif reg == 3:
        return _region3(p_pa, t_k, float(_iapws97()._Backward3_v_PT(p_pa / 1e6, t_k)))
    else:
        return _from_iapws(_iapws97()._Region5(t_k, p_pa / 1e6), 5)
    return Properties(h, s, v, 1.0 / v, cp, reg)


def properties_hsv(p_pa: float, t_k: float, ts: float | None = None) -> tuple[float, float, float]:
    """(h J/kg, s J/(kg K), v m3/kg) of :func:`properties`, the same numbers, without cp;
    a caller that has ``ts = tsat_unchecked(p_pa)`` already (p on the saturation line) hands
    it in and the region is told with it. Raises like :func:`properties`. A full scrape
    at 10,000 tags asks this for 5,000 points: 8.4 -> 5.2 us a state in region 2."""
    _check_inputs(p_pa, t_k)
    reg = _region(p_pa, t_k, ts)
    if reg == 1:
        return _region1_hsv(p_pa, t_k)
    if reg == 2:
        return _region2_hsv(p_pa, t_k)
    props = properties(p_pa, t_k)
    return props.h, props.s, props.v


def saturated_vapour_hsv(p_pa: float, ts: float | None = None) -> tuple[float, float, float]:
    """(h, s, v) of :func:`saturated_vapour`, the same numbers, without cp; a caller that
    has ``ts = tsat_unchecked(p_pa)`` already hands it in. Raises like it."""
    if ts is None or not (math.isfinite(p_pa) and PSAT_MIN <= p_pa <= PSAT_MAX):
        ts = tsat(p_pa)  # raises OutsideIF97 off the line
    if p_pa <= PSAT_623:
        return _region2_hsv(p_pa, ts)
    g = saturated_vapour(p_pa)
    return g.h, g.s, g.v


def _on_the_line(p_pa: float, ts: float, x: int) -> Properties:
    """Saturated liquid (``x`` 0: region 1 below 623.15 K) or vapour (``x`` 1: region 2) at
    an absolute pressure ``p_pa`` whose saturation temperature is ``ts``; region 3 above."""
    if p_pa <= PSAT_623:
        h, s, v, cp = _region2(p_pa, ts) if x else _region1(p_pa, ts)
        return Properties(h, s, v, 1.0 / v, cp, 2 if x else 1)
    return _region3(p_pa, ts, float(_iapws97()._Backward3_sat_v_P(p_pa / 1e6, ts, x)))


def _pair(p_pa: float, ts: float) -> tuple[Properties, Properties]:
    """Saturated liquid and vapour, the liquid always the denser. Within a few pascal of
    the critical pressure the two roots of the region 3 equation nearly coincide and
    Newton from the backward-equation volumes can land each on the other's side; the phases
    are then told apart by density, so hfg >= 0 and vf <= vg always hold."""
    f = _on_the_line(p_pa, ts, 0)
    g = _on_the_line(p_pa, ts, 1)
    return (g, f) if f.v > g.v else (f, g)


def saturated_liquid(p_pa: float) -> Properties:
    """Saturated liquid at an absolute pressure (Pa) on the saturation line."""
    ts = tsat(p_pa)
    return _on_the_line(p_pa, ts, 0) if p_pa <= PSAT_623 else _pair(p_pa, ts)[0]


def saturated_vapour(p_pa: float) -> Properties:
    """Saturated vapour at an absolute pressure (Pa) on the saturation line."""
    ts = tsat(p_pa)
    return _on_the_line(p_pa, ts, 1) if p_pa <= PSAT_623 else _pair(p_pa, ts)[1]


def saturated(p_pa: float) -> Saturation:
    """Saturated liquid and vapour at an absolute pressure (Pa): hf, hg, hfg, vf, vg, sf, sg."""
    ts = tsat(p_pa)
    f, g = _pair(p_pa, ts)
    return Saturation(ts, f.h, g.h, g.h - f.h, f.v, g.v, f.s, g.s)


# ---------------------------------------------------------------- speed of sound (flow)
# Appended for ISO 5167 flow (edge.flow): the speed of sound w and the isentropic exponent
# kappa = w^2 / (p v) = -(v/p) (dp/dv)_s, the exponent of the real-gas isentropic
# p v^kappa = const. That is the exponent ISO 5167's expansibility equations ask for; cp/cv
# is not it for steam (the two differ by a few per cent near saturation). Regions 1 and 2
# with R7-97 Table 3 and Table 12 formulas (w from the Gibbs derivatives); regions 3 and 5
# through iapws.


def _region1_w(p: float, t: float) -> float:
    """Speed of sound (m/s) in region 1, R7-97 Table 3."""
    pi = p / 16.53e6
    tau = 1386.0 / t
    a = 7.1 - pi
    b = tau - 1.222
    gp = gpp = gtt = gpt = 0.0
    for n, i, j, jj in _R1:
        term = n * a**i * b**j
        gp += i * term
        gpp += i * (i - 1) * term
        gtt += jj * term
        gpt += i * j * term
    gp = -gp / a
    gpp /= a * a
    gtt /= b * b
    gpt = -gpt / (a * b)
    w2 = R * t * gp * gp / ((gp - tau * gpt) ** 2 / (tau * tau * gtt) - gpp)
    return math.sqrt(w2)


def _region2_w(p: float, t: float) -> float:
    """Speed of sound (m/s) in region 2, R7-97 Table 12."""
    pi = p / 1e6
    tau = 540.0 / t
    g0tt = 0.0
    for n, j, jj in _R2_IDEAL:
        g0tt += jj * n * tau**j
    g0tt /= tau * tau
    b = tau - 0.5
    grp = grpp = grtt = grpt = 0.0
    for n, i, j, jj in _R2:
        term = n * pi**i * b**j
        grp += i * term
        grpp += i * (i - 1) * term
        grtt += jj * term
        grpt += i * j * term
    grp /= pi
    grpp /= pi * pi
    grtt /= b * b
    grpt /= pi * b
    top = 1.0 + 2.0 * pi * grp + pi * pi * grp * grp
    below = (1.0 - pi * pi * grpp) + (1.0 + pi * grp - tau * pi * grpt) ** 2 / (
        tau * tau * (g0tt + grtt)
    )
    return math.sqrt(R * t * top / below)


def speed_of_sound(p_pa: float, t_k: float) -> float:
    """Speed of sound (m/s) of a single-phase state; raises like :func:`properties`."""
    reg = region(p_pa, t_k)
    if reg == 1:
        return _region1_w(p_pa, t_k)
    if reg == 2:
        return _region2_w(p_pa, t_k)
    if reg == 3:
        rho = properties(p_pa, t_k).density
        return float(_iapws97()._Region3(rho, t_k)["w"])
    return float(_iapws97()._Region5(t_k, p_pa / 1e6)["w"])


def isentropic_exponent(p_pa: float, t_k: float) -> float:
    """Isentropic exponent kappa = w^2 / (p v) (dimensionless) of a single-phase state."""
    v = properties(p_pa, t_k).v
    w = speed_of_sound(p_pa, t_k)
    return w * w / (p_pa * v)


def saturated_vapour_isentropic_exponent(p_pa: float) -> float:
    """kappa = w^2 / (p v) of dry saturated vapour at an absolute pressure (Pa); region 2
    up to 623.15 K, region 3 above."""
    ts = tsat(p_pa)
    g = _on_the_line(p_pa, ts, 1)
    w = _region2_w(p_pa, ts) if p_pa <= PSAT_623 else float(_iapws97()._Region3(g.density, ts)["w"])
    return w * w / (p_pa * g.v)
