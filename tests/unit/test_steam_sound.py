"""The speed of sound and isentropic exponent appended to edge.steam, against IAPWS-IF97
(R7-97, 2012) Tables 5 and 15 and the iapws library."""

from __future__ import annotations

import pytest
from iapws import IAPWS97

from edge import steam


@pytest.mark.parametrize(
    ("t_k", "p_mpa", "w"),
    [
        # IAPWS-IF97 (R7-97, 2012), Table 5 (region 1)
        (300.0, 3.0, 0.150773921e4),
        (300.0, 80.0, 0.163469054e4),
        (500.0, 3.0, 0.124071337e4),
        # IAPWS-IF97 (R7-97, 2012), Table 15 (region 2)
        (300.0, 0.0035, 0.427920172e3),
        (700.0, 0.0035, 0.644289068e3),
        (700.0, 30.0, 0.480386523e3),
    ],
)
def test_speed_of_sound_tables(t_k, p_mpa, w):
    """w in regions 1 and 2 matches the R7-97 verification values."""
    assert steam.speed_of_sound(p_mpa * 1e6, t_k) == pytest.approx(w, rel=1e-8)


@pytest.mark.parametrize(
    ("p_mpa", "t_k"), [(1.0, 473.15), (0.2, 400.0), (20.0, 640.0), (5.0, 1200.0)]
)
def test_isentropic_exponent_matches_iapws(p_mpa, t_k):
    """kappa = w^2 / (p v) equals the same figure from the iapws library's IAPWS97 (regions
    2, 3 and 5)."""
    st = IAPWS97(P=p_mpa, T=t_k)
    # iapws library IAPWS97
    assert steam.isentropic_exponent(p_mpa * 1e6, t_k) == pytest.approx(
        st.w**2 / (p_mpa * 1e6 * st.v), rel=1e-9
    )


def test_isentropic_exponent_is_not_cp_over_cv():
    """For steam at 10 bara, 200 degC kappa (about 1.30) is below cp/cv (about 1.39)."""
    st = IAPWS97(P=1.0, T=473.15)
    kappa = steam.isentropic_exponent(1e6, 473.15)
    assert kappa == pytest.approx(1.299, abs=1e-3)
    assert st.cp / st.cv - kappa > 0.05


@pytest.mark.parametrize("p_mpa", [0.2, 1.0, 20.0])
def test_saturated_vapour_exponent_matches_iapws(p_mpa):
    """kappa of dry saturated vapour equals iapws IAPWS97(P, x=1)."""
    st = IAPWS97(P=p_mpa, x=1)
    # iapws library IAPWS97
    assert steam.saturated_vapour_isentropic_exponent(p_mpa * 1e6) == pytest.approx(
        st.w**2 / (p_mpa * 1e6 * st.v), rel=1e-8
    )
