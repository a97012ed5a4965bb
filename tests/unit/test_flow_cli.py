"""steam-edge flow: one-off ISO 5167 figures and compensation, text and --json."""

from __future__ import annotations

import json

import pytest
from fluids import flow_meter as fm

from edge import steam
from edge.cli import main

ORIFICE = (
    "flow orifice --pipe 102.26 mm --bore 60 mm --taps flange --dp 25 kPa "
    "--pressure 10 bara --temperature 200 degC"
)
KEYS = (
    "pressure_absolute",
    "temperature",
    "density",
    "viscosity",
    "isentropic_exponent",
    "discharge_coefficient",
    "expansibility",
    "reynolds",
    "mass_flow",
    "energy_rate",
)


def run(capsys, line: str) -> tuple[int, str, str]:
    code = main(line.split())
    out = capsys.readouterr()
    return code, out.out, out.err


def test_orifice_json_has_every_key_in_si(capsys):
    """--json prints each figure as {value, unit} in SI, with the limits and whether they hold."""
    code, out, _ = run(capsys, ORIFICE + " --json")
    assert code == 0
    d = json.loads(out)
    for key in KEYS:
        assert set(d[key]) == {"value", "unit"}
    assert d["pressure_absolute"] == {"value": 1e6, "unit": "Pa"}
    assert d["temperature"] == {"value": 473.15, "unit": "K"}
    assert d["mass_flow"]["unit"] == "kg/s"
    assert d["energy_rate"]["unit"] == "W"
    assert d["within_limits"] is True
    assert {lim["name"] for lim in d["limits"]} == {
        "bore_diameter",
        "pipe_diameter",
        "beta",
        "reynolds",
        "pressure_ratio",
    }


def test_orifice_matches_fluids(capsys):
    """The issue's example orifice gives fluids' mass flow with the same properties."""
    _, out, _ = run(capsys, ORIFICE + " --json")
    d = json.loads(out)
    rho, mu, k = (d[x]["value"] for x in ("density", "viscosity", "isentropic_exponent"))
    # fluids library ISO 5167 functions
    ref = fm.differential_pressure_meter_solver(
        D=0.10226,
        D2=0.060,
        rho=rho,
        mu=mu,
        k=k,
        P1=1e6,
        P2=1e6 - 25e3,
        meter_type=fm.ISO_5167_ORIFICE,
        taps="flange",
    )
    assert d["mass_flow"]["value"] == pytest.approx(ref, rel=1e-9)
    assert rho == pytest.approx(steam.properties(1e6, 473.15).density)


def test_text_output_names_the_standard(capsys):
    """The text answer names the part of ISO 5167 and the mass flow in kg/s and t/h."""
    code, out, _ = run(capsys, ORIFICE)
    assert code == 0
    assert out.startswith("orifice, flange taps (ISO 5167-2:2003)")
    assert "mass flow           0.892393 kg/s = 3.21261 t/h" in out


def test_wet_steam_is_bad(capsys):
    """Steam below Tsat gives no figure: bad, wet_steam, exit 1."""
    code, out, _ = run(capsys, ORIFICE.replace("200 degC", "170 degC") + " --json")
    d = json.loads(out)
    assert code == 1
    assert (d["quality"], d["reason"]) == ("bad", "wet_steam")
    assert "mass_flow" not in d


def test_outside_limits_is_uncertain(capsys):
    """A Venturi flow above its Reynolds range is uncertain with the limit named."""
    code, out, _ = run(
        capsys,
        "flow venturi --convergent machined --pipe 200 mm --bore 110 mm --dp 30 kPa "
        "--pressure 40 bara --temperature 400 degC --json",
    )
    d = json.loads(out)
    assert code == 0
    assert d["quality"] == "uncertain"
    assert d["reason"] == "outside_limits:reynolds"
    assert d["within_limits"] is False


def test_gauge_pressure_uses_the_barometer(capsys):
    """9 barg with --baro 98 kPa is 998 kPa absolute."""
    _, out, _ = run(capsys, ORIFICE.replace("10 bara", "9 barg") + " --baro 98 kPa --json")
    assert json.loads(out)["pressure_absolute"]["value"] == pytest.approx(998e3)


def test_pressure_without_reference_is_refused(capsys):
    """A bare '10 bar' is one line and exit 2."""
    code, _, err = run(capsys, ORIFICE.replace("10 bara", "10 bar"))
    assert code == 2
    assert err.strip() == (
        "error: --pressure '10 bar' does not say gauge or absolute; write e.g. '10 bara' "
        "or '9 barg'"
    )


def test_compensate_volumetric(capsys):
    """600 m3/h of steam at 10 bara, 200 degC is 600/3600 x rho kg/s."""
    _, out, _ = run(
        capsys,
        "flow compensate --meter volumetric --signal 600 m3/h --pressure 10 bara "
        "--temperature 200 degC --json",
    )
    d = json.loads(out)
    rho = steam.properties(1e6, 473.15).density
    assert d["mass_flow"]["value"] == pytest.approx(600 / 3600 * rho)


def test_compensate_dp_signal(capsys):
    """A 3 t/h DP signal scaled at 5.5 kg/m3 is 3 t/h x sqrt(rho / 5.5)."""
    _, out, _ = run(
        capsys,
        "flow compensate --meter dp-compensated --signal 3 t/h --design-density 5.5 kg/m3 "
        "--pressure 10 bara --temperature 200 degC --json",
    )
    rho = steam.properties(1e6, 473.15).density
    assert json.loads(out)["mass_flow"]["value"] == pytest.approx(3 / 3.6 * (rho / 5.5) ** 0.5)


def test_energy_reference_temperature(capsys):
    """--reference-temperature 105 degC with 4 bara: h_ref is IF97 water there."""
    _, out, _ = run(
        capsys, ORIFICE + " --reference-temperature 105 degC --reference-pressure 4 bara --json"
    )
    d = json.loads(out)
    h_ref = steam.properties(4e5, 378.15).h
    h = steam.properties(1e6, 473.15).h
    assert d["energy_rate"]["value"] == pytest.approx(d["mass_flow"]["value"] * (h - h_ref))


def test_water_orifice_has_no_expansibility_correction(capsys):
    """Feedwater (--water) has epsilon 1, no isentropic exponent and no pressure-ratio limit."""
    code, out, _ = run(
        capsys,
        "flow orifice --pipe 52.5 mm --bore 30 mm --taps corner --dp 40 kPa --pressure 20 bara "
        "--temperature 105 degC --water --json",
    )
    d = json.loads(out)
    assert code == 0
    assert d["expansibility"] == {"value": 1.0, "unit": "1"}
    assert "isentropic_exponent" not in d
    assert "pressure_ratio" not in {lim["name"] for lim in d["limits"]}
    assert d["density"]["value"] == pytest.approx(steam.properties(20e5, 378.15).density)


def test_nozzle_matches_fluids(capsys):
    """A long radius nozzle agrees with fluids' solver at the CLI's own properties."""
    _, out, _ = run(
        capsys,
        "flow nozzle --kind long_radius --pipe 150 mm --bore 90 mm --dp 40 kPa "
        "--pressure 12 barg --temperature 250 degC --baro 98 kPa --json",
    )
    d = json.loads(out)
    rho, mu, k = (d[x]["value"] for x in ("density", "viscosity", "isentropic_exponent"))
    p1 = 12e5 + 98e3
    # fluids library ISO 5167 functions
    ref = fm.differential_pressure_meter_solver(
        D=0.150,
        D2=0.090,
        rho=rho,
        mu=mu,
        k=k,
        P1=p1,
        P2=p1 - 40e3,
        meter_type=fm.LONG_RADIUS_NOZZLE,
    )
    assert d["mass_flow"]["value"] == pytest.approx(ref, rel=1e-9)
