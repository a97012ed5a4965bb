"""edge.flow.iso5167 against the fluids library's ISO 5167 functions, and its limits of use
at their edges (ISO 5167-2/-3/-4:2003)."""

from __future__ import annotations

import math

import pytest
from fluids import flow_meter as fm

from edge import steam
from edge.flow import iso5167
from edge.flow.iso5167 import Element, limits, solve

P1 = 10e5  # Pa absolute
T1 = 473.15  # K
RHO = steam.properties(P1, T1).density
KAPPA = steam.isentropic_exponent(P1, T1)
BETAS = (0.2, 0.3, 0.45, 0.6, 0.75)
REYNOLDS = (1e4, 1e5, 1e6, 1e7)
D = 0.2  # m

# (our element, the fluids meter type, the fluids taps argument)
ELEMENTS = {
    "orifice-corner": (Element("orifice", taps="corner"), fm.ISO_5167_ORIFICE, "corner"),
    "orifice-flange": (Element("orifice", taps="flange"), fm.ISO_5167_ORIFICE, "flange"),
    "orifice-d_d2": (Element("orifice", taps="d_d2"), fm.ISO_5167_ORIFICE, "D and D/2"),
    "isa1932": (Element("isa1932_nozzle"), fm.ISA_1932_NOZZLE, None),
    "long-radius": (Element("long_radius_nozzle"), fm.LONG_RADIUS_NOZZLE, None),
    "venturi-as_cast": (Element("venturi", convergent="as_cast"), fm.AS_CAST_VENTURI_TUBE, None),
    "venturi-machined": (
        Element("venturi", convergent="machined"),
        fm.MACHINED_CONVERGENT_VENTURI_TUBE,
        None,
    ),
    "venturi-rough_welded": (
        Element("venturi", convergent="rough_welded"),
        fm.ROUGH_WELDED_CONVERGENT_VENTURI_TUBE,
        None,
    ),
}


def _case(beta: float, re: float) -> tuple[float, float]:
    """dp (5 % of p1) and a viscosity that puts Re_D near ``re`` for a C of about 0.8."""
    dp = 0.05 * P1
    d = beta * D
    qm = 0.8 * math.pi / 4 * d * d * math.sqrt(2 * dp * RHO) / math.sqrt(1 - beta**4)
    return dp, 4 * qm / (math.pi * re * D)


@pytest.mark.parametrize("name", ELEMENTS)
def test_mass_flow_matches_fluids(name):
    """Mass flow over beta 0.2-0.75 and Re_D 1e4-1e7 agrees with fluids to 0.1 % (it agrees
    to about 1e-9; 1e-6 is asserted)."""
    element, meter, taps = ELEMENTS[name]
    worst = 0.0
    for beta in BETAS:
        for re in REYNOLDS:
            dp, mu = _case(beta, re)
            ours = solve(
                element,
                pipe=D,
                bore=beta * D,
                dp=dp,
                p1=P1,
                density=RHO,
                viscosity=mu,
                kappa=KAPPA,
            )
            # fluids library ISO 5167 functions
            ref = fm.differential_pressure_meter_solver(
                D=D,
                D2=beta * D,
                rho=RHO,
                mu=mu,
                k=KAPPA,
                P1=P1,
                P2=P1 - dp,
                meter_type=meter,
                taps=taps,
            )
            assert 0.5 * re < ours.reynolds < 2 * re
            worst = max(worst, abs(ours.mass_flow / ref - 1))
    assert worst < 1e-6


@pytest.mark.parametrize("taps", ["corner", "flange", "d_d2"])
def test_orifice_discharge_coefficient_matches_fluids(taps):
    """Reader-Harris/Gallagher C at the solved flow equals fluids' C_Reader_Harris_Gallagher,
    small pipes (D < 71.12 mm) included."""
    fluids_taps = {"corner": "corner", "flange": "flange", "d_d2": "D and D/2"}[taps]
    element = Element("orifice", taps=taps)
    for pipe in (0.05, 0.1, 0.5):
        for beta in BETAS:
            for re in REYNOLDS:
                mu = 1.5e-5
                m = re * math.pi * mu * pipe / 4
                ours = iso5167.discharge_coefficient(element, beta, re, pipe)
                # fluids library ISO 5167 functions
                ref = fm.C_Reader_Harris_Gallagher(pipe, beta * pipe, RHO, mu, m, fluids_taps)
                assert ours == pytest.approx(ref, rel=1e-9)


@pytest.mark.parametrize(
    ("element", "reference"),
    [
        (Element("isa1932_nozzle"), fm.C_ISA_1932_nozzle),
        (Element("long_radius_nozzle"), fm.C_long_radius_nozzle),
    ],
)
def test_nozzle_discharge_coefficient_matches_fluids(element, reference):
    """ISA 1932 and long radius nozzle C equal fluids' C_ISA_1932_nozzle and
    C_long_radius_nozzle."""
    for beta in BETAS:
        for re in REYNOLDS:
            mu = 1.5e-5
            m = re * math.pi * mu * D / 4
            # fluids library ISO 5167 functions
            assert iso5167.discharge_coefficient(element, beta, re, D) == pytest.approx(
                reference(D, beta * D, RHO, mu, m), rel=1e-9
            )


@pytest.mark.parametrize(
    ("convergent", "constant"),
    [
        ("as_cast", fm.AS_CAST_VENTURI_TUBE_C),
        ("machined", fm.MACHINED_CONVERGENT_VENTURI_TUBE_C),
        ("rough_welded", fm.ROUGH_WELDED_CONVERGENT_VENTURI_TUBE_C),
    ],
)
def test_venturi_discharge_coefficient_matches_fluids(convergent, constant):
    """Classical Venturi C per convergent (0.984, 0.995, 0.985) equals fluids' constants."""
    # fluids library ISO 5167 functions
    assert (
        iso5167.discharge_coefficient(Element("venturi", convergent=convergent), 0.5, 1e6, D)
        == constant
    )


def test_orifice_expansibility_matches_fluids():
    """Orifice epsilon (ISO 5167-2:2003) equals fluids' orifice_expansibility."""
    element = Element("orifice", taps="flange")
    for beta in BETAS:
        for ratio in (0.99, 0.9, 0.75):
            dp = (1 - ratio) * P1
            # fluids library ISO 5167 functions
            ref = fm.orifice_expansibility(D, beta * D, P1, P1 - dp, KAPPA)
            assert iso5167.expansibility(element, beta, dp, P1, KAPPA) == pytest.approx(
                ref, rel=1e-12
            )


@pytest.mark.parametrize(
    "element", [Element("isa1932_nozzle"), Element("venturi", convergent="machined")]
)
def test_nozzle_and_venturi_expansibility_matches_fluids(element):
    """Nozzle and Venturi epsilon (ISO 5167-3/-4:2003) equals fluids' nozzle_expansibility."""
    for beta in BETAS:
        for ratio in (0.99, 0.9, 0.75):
            dp = (1 - ratio) * P1
            # fluids library ISO 5167 functions
            ref = fm.nozzle_expansibility(D, beta * D, P1, P1 - dp, KAPPA)
            assert iso5167.expansibility(element, beta, dp, P1, KAPPA) == pytest.approx(
                ref, rel=1e-12
            )


def test_steam_orifice_matches_fluids_with_if97_properties():
    """A steam main (102.26 mm, 60 mm bore, flange taps, 25 kPa, 10 bara, 200 degC) with
    IF97 density and R12-08 viscosity gives the same flow as fluids."""
    from edge.flow.viscosity import viscosity

    mu = viscosity(T1, RHO)
    ours = solve(
        Element("orifice", taps="flange"),
        pipe=0.10226,
        bore=0.060,
        dp=25e3,
        p1=P1,
        density=RHO,
        viscosity=mu,
        kappa=KAPPA,
    )
    # fluids library ISO 5167 functions
    ref = fm.differential_pressure_meter_solver(
        D=0.10226,
        D2=0.060,
        rho=RHO,
        mu=mu,
        k=KAPPA,
        P1=P1,
        P2=P1 - 25e3,
        meter_type=fm.ISO_5167_ORIFICE,
        taps="flange",
    )
    assert ours.mass_flow == pytest.approx(ref, rel=1e-9)
    assert 0.85 < ours.mass_flow < 0.95  # about 0.89 kg/s (3.2 t/h)
    assert ours.within


def test_iteration_converges_in_a_few_steps():
    """The Reynolds iteration settles within 10 steps."""
    r = solve(
        Element("orifice", taps="corner"),
        pipe=0.1,
        bore=0.05,
        dp=1e4,
        p1=P1,
        density=RHO,
        viscosity=1.6e-5,
        kappa=KAPPA,
    )
    assert 1 <= r.iterations <= 10


def test_liquid_has_no_expansibility():
    """A liquid (kappa None) has epsilon 1 and no pressure-ratio limit."""
    r = solve(
        Element("orifice", taps="corner"),
        pipe=0.1,
        bore=0.05,
        dp=1e4,
        p1=P1,
        density=900.0,
        viscosity=1.5e-4,
        kappa=None,
    )
    assert r.expansibility == 1.0
    assert "pressure_ratio" not in {lim.name for lim in r.limits}


def test_no_differential_pressure_is_no_flow():
    """dp <= 0 gives 0 kg/s and leaves the Reynolds limit out."""
    r = solve(
        Element("orifice", taps="corner"),
        pipe=0.1,
        bore=0.05,
        dp=-5.0,
        p1=P1,
        density=RHO,
        viscosity=1.6e-5,
        kappa=KAPPA,
    )
    assert r.mass_flow == 0.0
    assert "reynolds" not in {lim.name for lim in r.limits}
    assert r.within


# --- limits of use at their edges --------------------------------------------------------


def _ok(element: Element, name: str, *, pipe=0.2, bore=0.1, re=1e6, ratio=0.9) -> bool:
    found = {
        lim.name: lim.ok
        for lim in limits(element, pipe=pipe, bore=bore, reynolds=re, pressure_ratio=ratio)
    }
    return found[name]


ORIFICE = Element("orifice", taps="corner")
FLANGE = Element("orifice", taps="flange")
ISA = Element("isa1932_nozzle")
LRN = Element("long_radius_nozzle")


@pytest.mark.parametrize(
    ("element", "name", "inside", "outside"),
    [
        # ISO 5167-2:2003, 5.3.1: 0.1 <= beta <= 0.75, 50 mm <= D <= 1000 mm, d >= 12.5 mm
        (ORIFICE, "beta", {"bore": 0.02}, {"bore": 0.0199}),
        (ORIFICE, "beta", {"bore": 0.15}, {"bore": 0.15002}),
        (ORIFICE, "pipe_diameter", {"pipe": 0.05, "bore": 0.025}, {"pipe": 0.0499, "bore": 0.025}),
        (ORIFICE, "pipe_diameter", {"pipe": 1.0, "bore": 0.5}, {"pipe": 1.0001, "bore": 0.5}),
        (ORIFICE, "bore_diameter", {"pipe": 0.1, "bore": 0.0125}, {"pipe": 0.1, "bore": 0.01249}),
        # Re_D >= 5000 for beta <= 0.56, >= 16000 beta^2 above (corner, D-D/2)
        (ORIFICE, "reynolds", {"re": 5000}, {"re": 4999}),
        (ORIFICE, "reynolds", {"bore": 0.14, "re": 16000 * 0.49}, {"bore": 0.14, "re": 7839}),
        # flange taps: Re_D >= 5000 and >= 170 beta^2 D (mm)
        (
            FLANGE,
            "reynolds",
            {"pipe": 0.5, "bore": 0.3, "re": 170 * 0.36 * 500},
            {"pipe": 0.5, "bore": 0.3, "re": 30599},
        ),
        (ORIFICE, "pressure_ratio", {"ratio": 0.75}, {"ratio": 0.7499}),
        # ISO 5167-3:2003, ISA 1932: 0.3 <= beta <= 0.8, 50 <= D <= 500 mm, Re 7e4/2e4 .. 1e7
        (ISA, "beta", {"bore": 0.06}, {"bore": 0.0599}),
        (ISA, "beta", {"bore": 0.16}, {"bore": 0.16002}),
        (ISA, "pipe_diameter", {"pipe": 0.5, "bore": 0.25}, {"pipe": 0.5001, "bore": 0.25}),
        (ISA, "reynolds", {"bore": 0.08, "re": 7e4}, {"bore": 0.08, "re": 69999}),
        (ISA, "reynolds", {"bore": 0.09, "re": 2e4}, {"bore": 0.09, "re": 19999}),
        (ISA, "reynolds", {"re": 1e7}, {"re": 1.0001e7}),
        # long radius: 0.2 <= beta <= 0.8, 50 <= D <= 630 mm, 1e4 <= Re <= 1e7
        (LRN, "beta", {"bore": 0.04}, {"bore": 0.0399}),
        (LRN, "pipe_diameter", {"pipe": 0.63, "bore": 0.3}, {"pipe": 0.6301, "bore": 0.3}),
        (LRN, "reynolds", {"re": 1e4}, {"re": 9999}),
        (LRN, "reynolds", {"re": 1e7}, {"re": 1.0001e7}),
    ],
)
def test_limit_edges(element, name, inside, outside):
    """A limit holds at its edge and fails just past it."""
    assert _ok(element, name, **inside)
    assert not _ok(element, name, **outside)


@pytest.mark.parametrize(
    ("convergent", "d_lo", "d_hi", "b_lo", "b_hi", "re_hi"),
    [
        # ISO 5167-4:2003, classical Venturi tube limits of use per convergent
        ("as_cast", 0.100, 0.800, 0.3, 0.75, 2e6),
        ("machined", 0.050, 0.250, 0.4, 0.75, 1e6),
        ("rough_welded", 0.200, 1.200, 0.4, 0.7, 2e6),
    ],
)
def test_venturi_limit_edges(convergent, d_lo, d_hi, b_lo, b_hi, re_hi):
    """Each Venturi convergent's D, beta and Re_D limits hold at the edge, fail past it."""
    v = Element("venturi", convergent=convergent)
    mid = (d_lo + d_hi) / 2
    assert _ok(v, "pipe_diameter", pipe=d_lo, bore=0.5 * d_lo)
    assert not _ok(v, "pipe_diameter", pipe=d_lo * 0.999, bore=0.5 * d_lo)
    assert _ok(v, "pipe_diameter", pipe=d_hi, bore=0.5 * d_hi)
    assert not _ok(v, "pipe_diameter", pipe=d_hi * 1.001, bore=0.5 * d_hi)
    assert _ok(v, "beta", pipe=mid, bore=b_lo * mid)
    assert not _ok(v, "beta", pipe=mid, bore=(b_lo - 1e-4) * mid)
    assert _ok(v, "beta", pipe=mid, bore=b_hi * mid)
    assert not _ok(v, "beta", pipe=mid, bore=(b_hi + 1e-4) * mid)
    assert _ok(v, "reynolds", pipe=mid, bore=0.5 * mid, re=2e5)
    assert not _ok(v, "reynolds", pipe=mid, bore=0.5 * mid, re=1.999e5)
    assert _ok(v, "reynolds", pipe=mid, bore=0.5 * mid, re=re_hi)
    assert not _ok(v, "reynolds", pipe=mid, bore=0.5 * mid, re=re_hi * 1.001)


def test_limit_text_names_the_clause():
    """A broken limit says its range, the standard's clause and the value."""
    (lim,) = [
        x
        for x in limits(ORIFICE, pipe=0.2, bore=0.18, reynolds=1e6, pressure_ratio=0.9)
        if x.name == "beta"
    ]
    assert not lim.ok
    assert lim.text() == "0.1 <= beta <= 0.75 (ISO 5167-2:2003, 5.3.1 limits of use), got 0.9"


def test_element_needs_taps_or_convergent():
    """An orifice without taps or a Venturi without convergent is refused."""
    with pytest.raises(ValueError, match="taps"):
        Element("orifice")
    with pytest.raises(ValueError, match="convergent"):
        Element("venturi")
