"""Dynamic viscosity of water and steam, IAPWS R12-08 (2008), industrial formulation. Pure.

mu = mu* . mu0(T) . mu1(T, rho) . mu2, with mu* = 1e-6 Pa s, T* = 647.096 K, rho* = 322 kg/m3:

* mu0, the dilute-gas part: R12-08 equation (11), coefficients H_i of Table 1;
* mu1, the finite-density part: R12-08 equation (12), coefficients H_ij of Table 2;
* mu2, the critical enhancement, is NOT implemented: it is taken as 1, which R12-08
  section 3 ("industrial use") allows everywhere except a small box around the critical
  point (645.91 K < T < 650.77 K and 245.8 kg/m3 < rho < 405.3 kg/m3). :func:`near_critical`
  says when a state is inside that box, so the caller marks the value uncertain there
  instead of passing it as good.

The density comes from IF97 (``edge.steam``), as R12-08 section 3 describes for industrial
calculations. Range of validity (R12-08 section 2.6): 273.16 K <= T <= 1173.15 K up to
1000 MPa at the lower temperatures; the monitor only asks inside the IF97 range.
"""

from __future__ import annotations

import math

__all__ = ["RHO_STAR", "T_STAR", "near_critical", "viscosity"]

T_STAR = 647.096  # K
RHO_STAR = 322.0  # kg/m3
MU_STAR = 1e-6  # Pa s

_H0 = (1.67752, 2.20462, 0.6366564, -0.241605)  # R12-08 Table 1

# R12-08 Table 2: (i, j, H_ij) for the nonzero coefficients
_HIJ = (
    (0, 0, 5.20094e-1),
    (1, 0, 8.50895e-2),
    (2, 0, -1.08374),
    (3, 0, -2.89555e-1),
    (0, 1, 2.22531e-1),
    (1, 1, 9.99115e-1),
    (2, 1, 1.88797),
    (3, 1, 1.26613),
    (5, 1, 1.20573e-1),
    (0, 2, -2.81378e-1),
    (1, 2, -9.06851e-1),
    (2, 2, -7.72479e-1),
    (3, 2, -4.89837e-1),
    (4, 2, -2.57040e-1),
    (0, 3, 1.61913e-1),
    (1, 3, 2.57399e-1),
    (0, 4, -3.25372e-2),
    (3, 4, 6.98452e-2),
    (4, 5, 8.72102e-3),
    (3, 6, -4.35673e-3),
    (5, 6, -5.93264e-4),
)
# grouped by i: row i holds (j, H_ij), so mu1 is sum_i x^i sum_j H_ij y^j
_ROWS = tuple(tuple((j, h) for i, j, h in _HIJ if i == row) for row in range(6))


def viscosity(t_k: float, density: float) -> float:
    """Dynamic viscosity (Pa s) at temperature ``t_k`` (K) and density (kg/m3), with the
    critical enhancement taken as 1 (R12-08 industrial use)."""
    t = t_k / T_STAR
    rho = density / RHO_STAR
    mu0 = 100.0 * math.sqrt(t) / (_H0[0] + _H0[1] / t + _H0[2] / (t * t) + _H0[3] / (t * t * t))
    x = 1.0 / t - 1.0
    y = rho - 1.0
    total = 0.0
    xi = 1.0
    for row in _ROWS:
        inner = 0.0
        for j, h in row:
            inner += h * y**j
        total += xi * inner
        xi *= x
    return MU_STAR * mu0 * math.exp(rho * total)


def near_critical(t_k: float, density: float) -> bool:
    """True inside the box around the critical point where R12-08 (section 3) says the
    critical enhancement mu2 may not be taken as 1: there this value is not vouched for."""
    return 645.91 < t_k < 650.77 and 245.8 < density < 405.3
