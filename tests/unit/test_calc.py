"""steam-edge calc: one-off figures through the real CLI entry point."""

from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from edge import steam
from edge.barometer import standard_atmosphere
from edge.cli import main

INHG = 3386.389


def run_json(capsys, *argv: str) -> dict:
    assert main(["calc", *argv, "--json"]) == 0
    return json.loads(capsys.readouterr().out)


def run_text(capsys, *argv: str) -> str:
    assert main(["calc", *argv]) == 0
    return capsys.readouterr().out


def run_error(capsys, *argv: str) -> str:
    assert main(["calc", *argv]) == 2
    captured = capsys.readouterr()
    assert captured.out == ""
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: ")
    return lines[0]


def row(text: str, label: str) -> list[str]:
    """The words after a table label."""
    for line in text.splitlines():
        if line.strip().startswith(label):
            return line.strip()[len(label) :].split()
    raise AssertionError(f"no row {label!r} in:\n{text}")


def test_gauge_pressure_at_altitude(capsys):
    """7 barg at 420 m: absolute = 7 bar + standard atmosphere at 420 m."""
    out = run_json(capsys, "7", "barg", "--altitude", "420", "m")
    p = 7e5 + standard_atmosphere(420.0)
    assert out["pressure_absolute"] == {"value": p, "unit": "Pa", "reference": "absolute"}
    assert out["barometer"]["origin"] == "altitude"
    assert out["tsat"]["value"] == steam.tsat(p)


def test_gauge_pressure_and_temperature_with_barometer(capsys):
    """7 barg 185 degC at 101.3 kPa: superheat and single-phase properties."""
    out = run_json(capsys, "7", "barg", "185", "degC", "--baro", "101.3", "kPa")
    p, t = 801_300.0, 458.15
    assert out["pressure_absolute"]["value"] == p
    assert out["barometer"] == {"value": 101_300.0, "unit": "Pa", "origin": "given"}
    assert out["superheat"] == {"value": pytest.approx(t - steam.tsat(p)), "unit": "K"}
    assert out["state"] == "superheated steam"
    props = steam.properties(p, t)
    assert out["enthalpy"] == {"value": props.h, "unit": "J/kg"}
    assert out["density"] == {"value": props.density, "unit": "kg/m3"}
    assert out["hg"]["value"] == steam.saturated(p).hg


def test_table_answers_in_bar_and_degc(capsys):
    """bar in: bar and degC out, with the state word."""
    text = run_text(capsys, "7", "barg", "185", "degC", "--baro", "101.3", "kPa")
    assert row(text, "absolute pressure") == ["8.01300", "bar", "abs"]
    assert row(text, "saturation temperature") == [f"{steam.tsat(801_300.0) - 273.15:.3f}", "degC"]
    assert row(text, "superheat")[1:] == ["K", "superheated", "steam"]
    assert row(text, "enthalpy")[1] == "kJ/kg"


def test_vacuum_in_inhg(capsys):
    """25 inHg vac: absolute = barometer - 84.66 kPa, answered in inHg and degF."""
    out = run_json(capsys, "25", "inHg", "vac")
    p = 101_325.0 - 25 * INHG
    assert out["pressure_absolute"]["value"] == pytest.approx(p)
    text = run_text(capsys, "25", "inHg", "vac")
    assert row(text, "absolute pressure") == [f"{p / INHG:.5f}", "inHg", "abs"]
    assert row(text, "saturation temperature")[1] == "degF"
    assert row(text, "saturated vapour enthalpy hg")[1] == "Btu/lb"


def test_psi_in_gives_psi_and_degf_out(capsys):
    """psi in: psi, degF, delta degF and Btu/lb out."""
    text = run_text(capsys, "100", "psig", "400", "degF")
    assert row(text, "absolute pressure")[1:] == ["psi", "abs"]
    assert row(text, "temperature") == ["400.000", "degF"]
    assert row(text, "superheat")[1:3] == ["delta", "degF"]
    assert row(text, "enthalpy")[1] == "Btu/lb"


def test_temperature_alone_gives_saturation_pressure(capsys):
    """170 degC: psat absolute and as gauge at the default standard atmosphere."""
    out = run_json(capsys, "170", "degC")
    p = steam.psat(443.15)
    assert out["psat"] == {"value": p, "unit": "Pa", "reference": "absolute"}
    assert out["pressure_gauge"]["value"] == pytest.approx(p - 101_325.0)
    assert out["barometer"]["origin"] == "standard"
    text = run_text(capsys, "170", "degC")
    assert row(text, "saturation pressure") == ["792.053", "kPa", "abs"]
    assert row(text, "as gauge pressure") == ["690.728", "kPa", "gauge"]
    assert row(text, "barometer")[:3] == ["101.325", "kPa", "standard"]
    assert "the default" in text


def test_temperature_below_100_c_gives_a_vacuum(capsys):
    """A saturation pressure below the barometer is shown as vacuum."""
    out = run_json(capsys, "60", "degC")
    assert out["pressure_vacuum"]["value"] == pytest.approx(101_325.0 - steam.psat(333.15))


def test_one_word_and_two_word_quantities_agree(capsys):
    """A quantity may be one word (7barg) or two (7 barg)."""
    one = run_json(capsys, "7barg", "185degC")
    two = run_json(capsys, "7", "barg", "185", "degC")
    assert one.pop("inputs") == {"pressure": "7barg", "temperature": "185degC"}
    assert two.pop("inputs") == {"pressure": "7 barg", "temperature": "185 degC"}
    assert one == two


def test_boiling_at_sea_level(capsys):
    """At 101.3 kPa absolute water boils near 100 degC."""
    text = run_text(capsys, "101.3", "kPaa")
    # common practice
    assert float(row(text, "saturation temperature")[0]) == pytest.approx(100.0, abs=0.1)


def test_printed_table_at_1000_kpa(capsys):
    """1000 kPa absolute gives Tsat 179.9 degC and hg about 2777 kJ/kg."""
    text = run_text(capsys, "1000", "kPaa")
    # common practice: printed steam tables
    assert float(row(text, "saturation temperature")[0]) == pytest.approx(179.9, abs=0.05)
    assert float(row(text, "saturated vapour enthalpy hg")[0]) == pytest.approx(2777, abs=1)


def test_boiler_gauge_at_7_bar(capsys):
    """A boiler gauge at 7 bar at sea level: ~800 kPa abs, Tsat ~170 degC."""
    out = run_json(capsys, "7", "barg")
    # common practice
    assert out["pressure_absolute"]["value"] == pytest.approx(800e3, rel=0.01)
    assert out["tsat"]["value"] - 273.15 == pytest.approx(170.0, abs=1.0)


def test_temperature_near_tsat_is_saturated(capsys):
    """(p, T) within 0.05 K of Tsat: state saturated, no single-phase properties."""
    out = run_json(capsys, "1000", "kPaa", "179.88", "degC")
    assert out["state"] == "saturated"
    assert "enthalpy" not in out and "hg" in out


def test_supercritical_state(capsys):
    """Above 22.064 MPa there is no Tsat, but properties at (p, T) are given."""
    out = run_json(capsys, "25", "MPaa", "600", "degC")
    assert out["state"] == "supercritical"
    assert "tsat" not in out
    assert out["enthalpy"]["value"] == steam.properties(25e6, 873.15).h


def test_json_values_are_si_with_units(capsys):
    """Every --json figure names an SI unit."""
    out = run_json(capsys, "100", "psig", "400", "degF")
    figures = [v for v in out.values() if isinstance(v, dict) and "value" in v]
    assert len(figures) > 10
    assert {f["unit"] for f in figures} <= {"Pa", "K", "J/kg", "J/(kg K)", "kg/m3"}
    assert "advisory" in out["advisory"]


@pytest.mark.parametrize(
    ("argv", "words"),
    [
        (["7", "bar"], "barg"),
        (["7", "barr"], "accepted"),
        ([], "give a pressure"),
        (["7", "barg", "2", "bara"], "one pressure"),
        (["400", "degC"], "saturation line"),
        (["7", "barg", "--baro", "14.7", "psig"], "absolute"),
        (["30", "inHg", "vac"], "positive absolute pressure"),
        (["420", "m"], "length"),
        (["7", "barg", "--altitude", "20", "km"], "altitude"),
    ],
)
def test_mistakes_give_one_line_and_exit_2(capsys, argv, words):
    """A user's mistake is one readable line on stderr and exit code 2."""
    assert words in run_error(capsys, *argv)


def test_reader_gone_is_a_quiet_exit_not_a_traceback():
    """Output into a pipe whose reader has gone (`calc ... | head -1`): exit 141, no traceback."""
    read_end, write_end = os.pipe()
    os.close(read_end)  # the reader is gone before the first byte: deterministic EPIPE
    try:
        run = subprocess.run(
            [sys.executable, "-m", "edge", "calc", "350", "degF"],
            stdout=write_end,
            stderr=subprocess.PIPE,
            text=True,
            timeout=60,
            cwd=Path(__file__).resolve().parents[2],
        )
    finally:
        os.close(write_end)
    # common practice: a tool ended by a closed pipe exits 128 + SIGPIPE (13) = 141
    assert (run.returncode, run.stderr) == (141, "")


def test_below_the_triple_point_is_vapour_not_supercritical(capsys):
    """0.5 kPa abs and 300 K lies below the triple-point pressure: vapour, never
    'above the critical pressure'."""
    out = run_json(capsys, "0.5", "kPaa", "300", "K")
    assert out["state"] == "vapour"
    assert not any("critical" in n for n in out["notes"])
    # IAPWS-IF97 (R7-97, 2012): below the triple-point pressure (611.657 Pa; 611.213 Pa by
    # equation 30) every state above 273.15 K is vapour, region 2
    assert out["enthalpy"]["value"] == pytest.approx(steam.properties(500.0, 300.0).h)
    assert steam.region(500.0, 300.0) == 2


def test_millipascal_is_not_megapascal(capsys):
    """'5 mPaa' is 5 millipascal (below IF97's 1 Pa), not 5 MPa."""
    # SI Brochure (BIPM, 9th edition, 2019), Table 7: m is milli, M is mega
    assert "below 1 Pa absolute" in run_error(capsys, "5", "mPaa", "300", "K")


def test_within_the_instrument_band_says_near_saturation(capsys):
    """0.5 K above Tsat: superheated figures, with a note that a measured point this close
    is near saturation for the monitor."""
    ts = steam.tsat(10e5 + 101_325.0)
    out = run_json(capsys, "10", "barg", f"{ts + 0.5}", "K")
    assert out["state"] == "superheated steam"
    assert any("near saturation" in n for n in out["notes"])
