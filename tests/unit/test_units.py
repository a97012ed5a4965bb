"""edge.units: parsing quantities with units, conversion to SI and back."""

from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from edge import units
from edge.errors import UnitError

ALL_KINDS = (
    "pressure",
    "temperature",
    "tdiff",
    "time",
    "length",
    "enthalpy",
    "entropy",
    "density",
)
EVERY_UNIT = [(kind, unit) for kind in ALL_KINDS for unit in units.units_of(kind)]


@pytest.mark.parametrize(
    ("text", "pa"),
    [
        ("1 Pa", 1.0),
        ("1 hPa", 100.0),
        ("1 kPa", 1e3),
        ("1 MPa", 1e6),
        ("1 bar", 1e5),
        ("1 mbar", 100.0),
        ("1 psi", 6894.757293168361),
        ("1 kg/cm2", 98066.5),
        ("1 kg/cm²", 98066.5),
        ("1 inHg", 3386.389),
        ("1 mmHg", 133.322387415),
    ],
)
def test_pressure_units_to_pascal(text, pa):
    """Each pressure unit converts with its defined factor."""
    # from memory: NIST SP 811 conversion factors (psi, kgf/cm2, inHg at 0 degC, mmHg)
    assert units.parse_pressure(text).value == pytest.approx(pa, rel=1e-12)


@pytest.mark.parametrize(
    ("text", "pa"),
    [
        ("1 atm", 101_325.0),  # standard atmosphere 1.013 25 E+05 (exact)
        ("760 Torr", 101_325.0),  # torr = 101 325/760 Pa (exact)
        ("1 Torr", 133.322_368_421),
        ("1 inH2O", 249.082),  # inch of water (39.2 degF) 2.490 82 E+02
        ("1 mmH2O", 9.806_65),  # millimetre of water, conventional 9.806 65 E+00
    ],
)
def test_trade_units_to_pascal(text, pa):
    """atm, Torr, inH2O (at 39.2 degF / 4 degC) and mmH2O convert with their factors."""
    # NIST SP 811 (2008), Appendix B.8
    assert units.parse_pressure(text).value == pytest.approx(pa, rel=1e-9)


@pytest.mark.parametrize(
    ("text", "pa"),
    [("5 mPa", 5e-3), ("5 MPa", 5e6), ("5 mpa", 5e-3), ("5 Mpa", 5e6), ("5 mbar", 500.0)],
)
def test_si_prefix_case_is_kept(text, pa):
    """m is milli and M is mega, however the rest is written."""
    # SI Brochure (BIPM, 9th edition, 2019), Table 7: prefix symbols are case-sensitive
    assert units.parse_pressure(text).value == pytest.approx(pa, rel=1e-12)


@pytest.mark.parametrize("text", ["5 MBAR", "5 MMHG"])
def test_a_prefix_in_the_wrong_case_is_refused(text):
    """MBAR would be megabar: refused with the accepted list rather than read as mbar."""
    with pytest.raises(UnitError, match="unknown pressure unit"):
        units.parse_pressure(text)


@pytest.mark.parametrize(
    ("text", "unit"), [("5 KPA", "kPa"), ("5 PSIG", "psi"), ("5 torr", "Torr")]
)
def test_spellings_without_a_case_sensitive_prefix_match_any_case(text, unit):
    """kPa, psi and Torr carry no case-sensitive prefix: any case is the same unit."""
    assert units.parse_pressure(text).unit == unit


@pytest.mark.parametrize(
    ("text", "reference", "unit"),
    [
        ("7 barg", "gauge", "bar"),
        ("7barg", "gauge", "bar"),
        ("14.7 psia", "absolute", "psi"),
        ("100 kPag", "gauge", "kPa"),
        ("25 inHg vac", "vacuum", "inHg"),
        ("25inHgvac", "vacuum", "inHg"),
        ("3 bar gauge", "gauge", "bar"),
        ("3 bar(g)", "gauge", "bar"),
        ("3 bar abs", "absolute", "bar"),
        ("7 bar", None, "bar"),
    ],
)
def test_pressure_reference_suffixes(text, reference, unit):
    """g/a suffixes, words and the vacuum form set the reference; a bare unit has none."""
    q = units.parse_pressure(text)
    assert (q.reference, q.unit, q.kind) == (reference, unit, "pressure")


@pytest.mark.parametrize("unit", ["kg/cm²", *units.PRESSURE_UNITS])
@pytest.mark.parametrize(
    ("suffix", "reference"),
    [("g", "gauge"), ("a", "absolute"), (" vac", "vacuum"), ("vac", "vacuum"), ("", None)],
)
def test_every_pressure_unit_takes_every_reference_suffix(unit, suffix, reference):
    """Each pressure unit takes the g/a suffixes and the vacuum form: 2 psig, 2 inHg vac."""
    q = units.parse_pressure(f"2 {unit}{suffix}")
    assert (q.reference, q.unit) == (reference, unit.replace("²", "2"))
    assert q.value == pytest.approx(2 * units.PRESSURE_UNITS[q.unit], rel=1e-12)


@pytest.mark.parametrize(
    ("text", "kelvin"),
    [
        ("185 degC", 458.15),
        ("185 °C", 458.15),
        ("185 C", 458.15),
        ("185 deg C", 458.15),
        ("185 \u2103", 458.15),
        ("212 \u2109", 373.15),
        ("212 degF", 373.15),
        ("212 °F", 373.15),
        ("-40 F", 233.15),
        ("300 K", 300.0),
    ],
)
def test_temperatures_to_kelvin(text, kelvin):
    """degC, degF and K all land in kelvin."""
    # common practice: 212 degF = 100 degC; -40 degF = -40 degC
    assert units.parse_temperature(text) == pytest.approx(kelvin, abs=1e-9)


def test_temperature_difference_in_delta_degf():
    """A difference of 3.6 delta degF is 2 K (no offset)."""
    assert units.parse_temperature_difference("3.6 delta degF") == pytest.approx(2.0)
    assert units.parse_temperature_difference("2 K") == 2.0


@pytest.mark.parametrize(("text", "seconds"), [("500 ms", 0.5), ("1 min", 60.0), ("2 h", 7200.0)])
def test_durations(text, seconds):
    """Times convert to seconds."""
    assert units.parse_duration(text) == pytest.approx(seconds)


def test_lengths_in_feet():
    """1378 ft is about 420 m."""
    # common practice: 1 ft = 0.3048 m exactly
    assert units.parse_length("1378 ft") == pytest.approx(420.01, abs=0.01)


def test_steam_property_units():
    """Enthalpy, entropy and density units exist for display."""
    # from memory: 1 Btu(IT)/lb = 2.326 kJ/kg; 1 lb/ft3 = 16.0185 kg/m3
    assert units.to_si(1.0, "Btu/lb", "enthalpy") == 2326.0
    assert units.to_si(1.0, "lb/ft3", "density") == pytest.approx(16.018463, rel=1e-7)
    assert units.to_si(1.0, "Btu/(lb R)", "entropy") == 4186.8
    assert units.parse("2777.1 kJ/kg", "enthalpy").value == pytest.approx(2777100.0)


def test_property_units_of_alarm_limits():
    """MJ/kg and g/cm3 are enthalpy and density units; spaces inside a unit do not matter."""
    # by definition of the SI prefixes: 1 MJ/kg = 1e6 J/kg, 1 g/cm3 = 1000 kg/m3
    assert units.parse("2.9 MJ/kg", "enthalpy").value == pytest.approx(2.9e6)
    assert units.parse("0.9 g/cm3", "density").value == pytest.approx(900.0)
    assert units.parse("2900 kJ / kg", "enthalpy").unit == "kJ/kg"
    assert units.parse("6.6 kJ/(kgK)", "entropy").unit == "kJ/(kg K)"


def test_display_units_are_not_found_without_a_kind():
    """A tag unit looked up without a kind never becomes a display-only kind."""
    with pytest.raises(UnitError):
        units.unit_info("kg/m3")


def test_unknown_unit_lists_the_accepted_ones():
    """An unknown pressure unit names the accepted units."""
    with pytest.raises(UnitError) as exc:
        units.parse("7 barr", "pressure")
    assert "psi" in str(exc.value) and "kPa" in str(exc.value) and "barr" in str(exc.value)


def test_unknown_unit_of_any_kind_lists_every_kind():
    """Without a kind, an unknown unit lists the pressure, temperature, time and length units."""
    with pytest.raises(UnitError) as exc:
        units.parse("7 furlong")
    message = str(exc.value)
    for accepted in ("kg/cm2", "inHg", "mmHg", "barg", "vac", "degF", "min", "ms", "ft"):
        assert accepted in message


def test_unknown_temperature_unit_lists_the_accepted_ones():
    """An unknown temperature unit names degC, degF and K."""
    with pytest.raises(UnitError, match="degC, degF"):
        units.parse("100 degR", "temperature")


@pytest.mark.parametrize("text", ["7", "bar", "", "1e400 bar", "nan bar", "7 bar bar"])
def test_malformed_quantities_are_errors(text):
    """No unit, no number, overflow or junk are UnitErrors."""
    with pytest.raises(UnitError):
        units.parse(text, "pressure")


def test_negative_duration_is_an_error():
    """A duration cannot be negative."""
    with pytest.raises(UnitError, match="negative"):
        units.parse_duration("-1 s")


def test_non_text_is_an_error():
    """A bare number from YAML is not a quantity."""
    with pytest.raises(UnitError):
        units.parse(7, "pressure")  # type: ignore[arg-type]


def test_format_quantity_with_reference():
    """A gauge pressure formats with its reference and parses back."""
    text = units.format_quantity(7e5, "bar", reference="gauge")
    assert text == "7.0 bar gauge"
    assert units.parse(text) == units.Quantity(7e5, "pressure", "bar", "gauge")


def test_format_quantity_refuses_nan():
    """NaN has no written form."""
    with pytest.raises(UnitError):
        units.format_quantity(float("nan"), "bar")


@given(
    st.sampled_from(EVERY_UNIT),
    st.floats(min_value=-1e9, max_value=1e9, allow_nan=False, allow_infinity=False),
)
def test_to_si_from_si_round_trip(kind_unit, value):
    """from_si(to_si(x)) returns x for every unit."""
    kind, unit = kind_unit
    back = units.from_si(units.to_si(value, unit, kind), unit, kind)
    assert back == pytest.approx(value, rel=1e-12, abs=1e-9)


@given(
    st.sampled_from(EVERY_UNIT),
    st.floats(min_value=-1e9, max_value=1e9, allow_nan=False, allow_infinity=False),
)
def test_parse_format_round_trip(kind_unit, si):
    """parse(format_quantity(x)) returns x for every unit."""
    kind, unit = kind_unit
    q = units.parse(units.format_quantity(si, unit, kind), kind)
    assert q.value == pytest.approx(si, rel=1e-12, abs=1e-9)
    assert (q.kind, q.unit) == (kind, unit)


@given(
    st.sampled_from(units.units_of("pressure")),
    st.sampled_from(["absolute", "gauge", "vacuum"]),
    st.floats(min_value=0, max_value=1e8, allow_nan=False),
)
def test_pressure_reference_round_trip(unit, reference, si):
    """A pressure keeps its reference through format and parse."""
    q = units.parse(units.format_quantity(si, unit, reference=reference), "pressure")
    assert q.reference == reference
    assert q.value == pytest.approx(si, rel=1e-12, abs=1e-9)
