"""edge.flow.viscosity against IAPWS R12-08 (2008), Table 4 check values (mu2 = 1)."""

from __future__ import annotations

import pytest

from edge.flow.viscosity import near_critical, viscosity


@pytest.mark.parametrize(
    ("t_k", "rho", "mu_upas"),
    [
        # IAPWS R12-08 (2008), Table 4: (T K, rho kg/m3, mu uPa s), critical enhancement 1
        (298.15, 998.0, 889.735100),
        (298.15, 1200.0, 1437.649467),
        (373.15, 1000.0, 307.883622),
        (433.15, 1.0, 14.538324),
        (433.15, 1000.0, 217.685358),
        (873.15, 1.0, 32.619287),
        (873.15, 100.0, 35.802262),
        (873.15, 600.0, 77.430195),
        (1173.15, 1.0, 44.217245),
        (1173.15, 100.0, 47.640433),
        (1173.15, 400.0, 64.154608),
    ],
)
def test_check_values(t_k, rho, mu_upas):
    """The industrial formulation reproduces R12-08's check values to their 9 digits."""
    assert viscosity(t_k, rho) * 1e6 == pytest.approx(mu_upas, rel=5e-8)


def test_agrees_with_iapws_library():
    """Across steam and water states it equals the iapws library's _Viscosity (mu0 mu1)."""
    from iapws._iapws import _Viscosity

    for t in (280.0, 373.15, 473.15, 623.15, 800.0):
        for rho in (0.5, 5.0, 50.0, 800.0):
            # iapws library, R12-08 implementation
            assert viscosity(t, rho) == pytest.approx(_Viscosity(rho, t), rel=1e-12)


def test_near_critical_box():
    """The box where mu2 = 1 is not enough: inside at 647.3 K and 322 kg/m3, outside at
    the steam mains' states."""
    assert near_critical(647.3, 322.0)
    assert not near_critical(473.15, 5.0)
    assert not near_critical(647.3, 100.0)
