"""Mass flow through a differential-pressure primary element, ISO 5167 (2003 editions). Pure.

ISO 5167-1:2003 equation (1): qm = C / sqrt(1 - beta^4) * epsilon * pi/4 * d^2 * sqrt(2 dp rho1)

with D and d at the flowing temperature, rho1 the density at the upstream tapping, and
Re_D = 4 qm / (pi mu D). C depends on Re_D, which depends on qm, so :func:`solve` iterates
(ISO 5167-1:2003, annex on iterative computations): start from C at infinite Reynolds
number, compute qm and Re_D, recompute C, until C no longer moves (1e-12 relative; the
fixed point converges in 3-6 steps because C changes slowly with Re_D).

Elements and their discharge coefficients:

* ``orifice`` (ISO 5167-2:2003, 5.3.2): Reader-Harris/Gallagher equation with the tapping
  terms L1, L'2 of corner (0, 0), D and D/2 (1, 0.47) and flange (25.4 mm / D both) taps,
  and the small-pipe term for D < 71.12 mm; the expansibility equation of 5.3.2.
* ``isa1932_nozzle`` (ISO 5167-3:2003, ISA 1932 nozzle): C = 0.9900 - 0.2262 beta^4.1
  - (0.00175 beta^2 - 0.0033 beta^4.15) (1e6 / Re_D)^1.15.
* ``long_radius_nozzle`` (ISO 5167-3:2003, long radius nozzle): C = 0.9965 - 0.00653 beta^0.5
  (1e6 / Re_D)^0.5.
* ``venturi`` (ISO 5167-4:2003, classical Venturi tube): a constant C for each construction of the
  convergent: ``as_cast`` 0.984, ``machined`` 0.995, ``rough_welded`` (sheet-iron) 0.985.

Nozzles and Venturi tubes use the expansibility equation of ISO 5167-3:2003 and ISO
5167-4:2003 (the isentropic-flow form in tau = p2/p1, kappa and beta).

Limits of use (each as a :class:`Limit` with the clause it comes from): beta, Re_D, D, d
where the part gives one, and p2/p1 >= 0.75 for every element. Outside them the standard
gives no uncertainty for the figure: the result still carries the number, and the caller
marks it uncertain with the failed limits as the reason. A liquid (``kappa=None``) has
epsilon = 1 and no pressure-ratio limit. Not checked here (installation, not readings):
pipe roughness, straight lengths, edge sharpness, plate thickness.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

__all__ = [
    "CONVERGENTS",
    "ELEMENTS",
    "TAPS",
    "Element",
    "FlowResult",
    "Limit",
    "discharge_coefficient",
    "expansibility",
    "limits",
    "solve",
]

ElementKind = Literal["orifice", "isa1932_nozzle", "long_radius_nozzle", "venturi"]
ELEMENTS: tuple[str, ...] = ("orifice", "isa1932_nozzle", "long_radius_nozzle", "venturi")
TAPS: tuple[str, ...] = ("corner", "flange", "d_d2")
CONVERGENTS: tuple[str, ...] = ("as_cast", "machined", "rough_welded")

_VENTURI_C = {"as_cast": 0.984, "machined": 0.995, "rough_welded": 0.985}
_PI4 = math.pi / 4.0
_PRESSURE_RATIO_MIN = 0.75  # p2/p1, every part
_EDGE = 1e-9  # relative rounding allowance on a limit's edge


@dataclass(frozen=True, slots=True)
class Element:
    """A primary element: its kind, and the taps (orifice) or convergent (Venturi)."""

    kind: ElementKind
    taps: str | None = None  # orifice: corner | flange | d_d2
    convergent: str | None = None  # venturi: as_cast | machined | rough_welded

    def __post_init__(self) -> None:
        if self.kind not in ELEMENTS:
            raise ValueError(f"unknown element {self.kind!r}; expected one of {ELEMENTS}")
        if self.kind == "orifice" and self.taps not in TAPS:
            raise ValueError(f"an orifice needs taps: one of {', '.join(TAPS)}")
        if self.kind == "venturi" and self.convergent not in CONVERGENTS:
            raise ValueError(f"a Venturi tube needs convergent: one of {', '.join(CONVERGENTS)}")

    @property
    def part(self) -> str:
        """The part of ISO 5167 that covers this element."""
        return {
            "orifice": "ISO 5167-2:2003",
            "isa1932_nozzle": "ISO 5167-3:2003",
            "long_radius_nozzle": "ISO 5167-3:2003",
            "venturi": "ISO 5167-4:2003",
        }[self.kind]


@dataclass(frozen=True, slots=True)
class Limit:
    """One limit of use: the value, the range it must lie in, whether it holds."""

    name: str  # beta | reynolds | pipe_diameter | bore_diameter | pressure_ratio
    value: float
    low: float | None
    high: float | None
    clause: str  # where the standard sets it

    @property
    def ok(self) -> bool:
        """Inside the range; a value on an edge but for rounding (1e-9 relative, e.g. a beta
        of 0.1 computed as 0.09999999999999999) is inside."""
        v = self.value
        if not math.isfinite(v):
            return False
        return (self.low is None or v >= self.low * (1.0 - _EDGE)) and (
            self.high is None or v <= self.high * (1.0 + _EDGE)
        )

    def text(self) -> str:
        lo = f"{self.low:g} <= " if self.low is not None else ""
        hi = f" <= {self.high:g}" if self.high is not None else ""
        return f"{lo}{self.name}{hi} ({self.clause}), got {self.value:.6g}"


@dataclass(frozen=True, slots=True)
class FlowResult:
    """Mass flow and the figures it came from; ``limits`` say whether the standard covers it."""

    mass_flow: float  # kg/s
    discharge_coefficient: float
    expansibility: float
    reynolds: float  # pipe Reynolds number Re_D
    beta: float
    pipe: float  # m, D at flowing temperature
    bore: float  # m, d at flowing temperature
    iterations: int
    limits: tuple[Limit, ...]

    @property
    def within(self) -> bool:
        return all(lim.ok for lim in self.limits)

    def broken(self) -> tuple[Limit, ...]:
        return tuple(lim for lim in self.limits if not lim.ok)


# --- discharge coefficients -------------------------------------------------------------


def _tap_lengths(taps: str, pipe: float) -> tuple[float, float]:
    if taps == "corner":
        return 0.0, 0.0
    if taps == "d_d2":
        return 1.0, 0.47
    inch_over_d = 0.0254 / pipe  # flange taps: 25.4 mm from each face
    return inch_over_d, inch_over_d


def _rhg(beta: float, re: float, pipe: float, taps: str) -> float:
    """Reader-Harris/Gallagher, ISO 5167-2:2003, 5.3.2.1."""
    l1, l2 = _tap_lengths(taps, pipe)
    b4 = beta**4
    m2 = 2.0 * l2 / (1.0 - beta)
    a = (19000.0 * beta / re) ** 0.8
    c = (
        0.5961
        + 0.0261 * beta * beta
        - 0.216 * b4 * b4
        + 0.000521 * (1e6 * beta / re) ** 0.7
        + (0.0188 + 0.0063 * a) * beta**3.5 * (1e6 / re) ** 0.3
        + (0.043 + 0.080 * math.exp(-10.0 * l1) - 0.123 * math.exp(-7.0 * l1))
        * (1.0 - 0.11 * a)
        * b4
        / (1.0 - b4)
        - 0.031 * (m2 - 0.8 * m2**1.1) * beta**1.3
    )
    if pipe < 0.07112:  # small pipes: the last term of the equation
        c += 0.011 * (0.75 - beta) * (2.8 - pipe / 0.0254)
    return c


def discharge_coefficient(element: Element, beta: float, re: float, pipe: float) -> float:
    """C at a diameter ratio, pipe Reynolds number (``math.inf`` for the limit) and D (m)."""
    kind = element.kind
    if kind == "orifice":
        return _rhg(beta, re, pipe, element.taps or "corner")
    if kind == "isa1932_nozzle":
        x = (1e6 / re) ** 1.15
        return 0.9900 - 0.2262 * beta**4.1 - (0.00175 * beta * beta - 0.0033 * beta**4.15) * x
    if kind == "long_radius_nozzle":
        return 0.9965 - 0.00653 * math.sqrt(beta) * math.sqrt(1e6 / re)
    return _VENTURI_C[element.convergent or "as_cast"]


# --- expansibility ------------------------------------------------------------------------


def expansibility(element: Element, beta: float, dp: float, p1: float, kappa: float) -> float:
    """Expansibility factor epsilon for a gas or vapour with isentropic exponent ``kappa``,
    differential pressure ``dp`` and upstream absolute pressure ``p1`` (both Pa)."""
    if dp <= 0.0:
        return 1.0
    tau = (p1 - dp) / p1
    if element.kind == "orifice":  # ISO 5167-2:2003
        b4 = beta**4
        return 1.0 - (0.351 + 0.256 * b4 + 0.93 * b4 * b4) * (1.0 - tau ** (1.0 / kappa))
    # ISO 5167-3:2003 and ISO 5167-4:2003
    b4 = beta**4
    t2k = tau ** (2.0 / kappa)
    return math.sqrt(
        kappa
        * t2k
        / (kappa - 1.0)
        * (1.0 - b4)
        / (1.0 - b4 * t2k)
        * (1.0 - tau ** ((kappa - 1.0) / kappa))
        / (1.0 - tau)
    )


# --- limits of use ------------------------------------------------------------------------


def limits(
    element: Element,
    *,
    pipe: float,
    bore: float,
    reynolds: float | None,
    pressure_ratio: float | None,
) -> tuple[Limit, ...]:
    """The limits of use that apply to ``element`` (diameters in m). ``reynolds`` None
    (no flow) leaves the Reynolds limit out; ``pressure_ratio`` None (a liquid) the ratio."""
    beta = bore / pipe
    d_mm = pipe * 1e3
    out: list[Limit] = []
    kind = element.kind
    if kind == "orifice":
        c = "ISO 5167-2:2003, 5.3.1 limits of use"
        out.append(Limit("bore_diameter", bore, 0.0125, None, c))
        out.append(Limit("pipe_diameter", pipe, 0.050, 1.000, c))
        out.append(Limit("beta", beta, 0.1, 0.75, c))
        if reynolds is not None:
            if element.taps == "flange":
                low = max(5000.0, 170.0 * beta * beta * d_mm)
            else:
                low = 5000.0 if beta <= 0.56 else 16000.0 * beta * beta
            out.append(Limit("reynolds", reynolds, low, None, c))
    elif kind == "isa1932_nozzle":
        c = "ISO 5167-3:2003, ISA 1932 nozzle limits of use"
        out.append(Limit("pipe_diameter", pipe, 0.050, 0.500, c))
        out.append(Limit("beta", beta, 0.3, 0.8, c))
        if reynolds is not None:
            low = 7e4 if beta < 0.44 else 2e4
            out.append(Limit("reynolds", reynolds, low, 1e7, c))
    elif kind == "long_radius_nozzle":
        c = "ISO 5167-3:2003, long radius nozzle limits of use"
        out.append(Limit("pipe_diameter", pipe, 0.050, 0.630, c))
        out.append(Limit("beta", beta, 0.2, 0.8, c))
        if reynolds is not None:
            out.append(Limit("reynolds", reynolds, 1e4, 1e7, c))
    else:
        c = f"ISO 5167-4:2003, {element.convergent} convergent limits of use"
        lo_d, hi_d, lo_b, hi_b, hi_re = {
            "as_cast": (0.100, 0.800, 0.3, 0.75, 2e6),
            "machined": (0.050, 0.250, 0.4, 0.75, 1e6),
            "rough_welded": (0.200, 1.200, 0.4, 0.7, 2e6),
        }[element.convergent or "as_cast"]
        out.append(Limit("pipe_diameter", pipe, lo_d, hi_d, c))
        out.append(Limit("beta", beta, lo_b, hi_b, c))
        if reynolds is not None:
            out.append(Limit("reynolds", reynolds, 2e5, hi_re, c))
    if pressure_ratio is not None:
        where = f"{element.part}, expansibility" if kind == "orifice" else c
        out.append(Limit("pressure_ratio", pressure_ratio, _PRESSURE_RATIO_MIN, None, where))
    return tuple(out)


# --- the iteration ------------------------------------------------------------------------


def solve(
    element: Element,
    *,
    pipe: float,
    bore: float,
    dp: float,
    p1: float,
    density: float,
    viscosity: float,
    kappa: float | None,
    max_iterations: int = 50,
) -> FlowResult:
    """Mass flow (kg/s) through ``element`` with D ``pipe`` and d ``bore`` (m, at flowing
    temperature), differential pressure ``dp`` (Pa), upstream absolute pressure ``p1`` (Pa),
    upstream density (kg/m3), dynamic viscosity (Pa s) and isentropic exponent (None: a
    liquid). ``dp <= 0`` is no flow: 0 kg/s, Re_D 0, no Reynolds limit."""
    beta = bore / pipe
    b4 = beta**4
    ratio = (p1 - max(dp, 0.0)) / p1 if kappa is not None else None
    if dp <= 0.0:
        c0 = discharge_coefficient(element, beta, math.inf, pipe)
        lim = limits(element, pipe=pipe, bore=bore, reynolds=None, pressure_ratio=ratio)
        return FlowResult(0.0, c0, 1.0, 0.0, beta, pipe, bore, 0, lim)
    eps = 1.0 if kappa is None else expansibility(element, beta, dp, p1, kappa)
    k = eps * _PI4 * bore * bore * math.sqrt(2.0 * dp * density) / math.sqrt(1.0 - b4)
    to_re = 4.0 / (math.pi * viscosity * pipe)
    c = discharge_coefficient(element, beta, math.inf, pipe)
    re = to_re * c * k
    n = 0
    for n in range(1, max_iterations + 1):  # noqa: B007 - n is the count reported
        re = to_re * c * k
        c_new = discharge_coefficient(element, beta, re, pipe)
        if abs(c_new - c) <= 1e-12 * c_new:
            c = c_new
            break
        c = c_new
    qm = c * k
    re = to_re * qm
    lim = limits(element, pipe=pipe, bore=bore, reynolds=re, pressure_ratio=ratio)
    return FlowResult(qm, c, eps, re, beta, pipe, bore, n, lim)
