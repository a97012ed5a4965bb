"""edge.derive: absolute pressure, Tsat, superheat, properties, quality and hints."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from edge import steam
from edge.config import parse_config
from edge.derive import PointSpec, compile_points, evaluate
from edge.derive import build as derive_objects
from edge.derive import general as derive
from edge.errors import ConfigError
from edge.model import (
    GOOD,
    POINT_QUANTITIES,
    BarometerReading,
    Level,
    Quality,
    Sample,
    bad,
    uncertain,
)

BARO = BarometerReading(101_325.0, "fixed", GOOD)
INHG = 3386.389
PSI = 6894.757293168361


def spec(
    state: str = "saturated",
    reference: str = "gauge",
    *,
    p_unit: str = "bar",
    t_unit: str = "degC",
    tolerance: float = 2.0,
    temperature: str | None = "drum_t",
) -> PointSpec:
    return PointSpec("drum", state, tolerance, "drum_p", reference, temperature, p_unit, t_unit)


def snap(p: float | None, t: float | None, *, pq: Quality = GOOD, tq: Quality = GOOD):
    out = {}
    if p is not None:
        out["drum_p"] = Sample("drum_p", p, pq, 0.0, 0.0)
    if t is not None:
        out["drum_t"] = Sample("drum_t", t, tq, 0.0, 0.0)
    return out


def one(s: PointSpec, snapshot, barometer=BARO, **kw):
    return evaluate([s], snapshot, barometer, **kw)["drum"]


def value(point, quantity):
    return point.readings[quantity].value


# ---------------------------------------------------------------- pressure references


def test_gauge_reading_at_sea_level():
    """7 bar on a gauge at sea level: ~800 kPa absolute, Tsat ~170 degC."""
    ts = steam.tsat(801_325.0)
    point = one(spec(), snap(7e5, ts))
    assert value(point, "pressure") == 801_325.0
    # common practice: a boiler gauge at 7 bar is ~800 kPa abs with Tsat ~170 degC
    assert value(point, "pressure") == pytest.approx(800e3, rel=0.01)
    assert value(point, "tsat") - 273.15 == pytest.approx(170.0, abs=1.0)
    assert point.quality == GOOD and point.hint is None


def test_vacuum_reading_is_barometer_minus_value():
    """25 inHg of vacuum is the barometer minus 84.7 kPa."""
    p = 101_325.0 - 25 * INHG
    point = one(spec("subcooled", "vacuum", p_unit="inHg"), snap(25 * INHG, 300.0))
    assert value(point, "pressure") == pytest.approx(p)
    assert value(point, "tsat") == pytest.approx(steam.tsat(p))


def test_absolute_reading_passes_through():
    """An absolute pressure is used as it is, whatever the barometer."""
    point = one(spec("superheated", "absolute"), snap(4e6, 673.15), BarometerReading(9e4, "tag"))
    assert value(point, "pressure") == 4e6


def test_superheat_and_deviation():
    """Superheat is T - Tsat; deviation is |superheat| on a saturated point only."""
    ts = steam.tsat(801_325.0)
    sat = one(spec(), snap(7e5, ts - 1.5))
    assert value(sat, "superheat") == pytest.approx(-1.5)
    assert value(sat, "deviation") == pytest.approx(1.5)
    hot = one(spec("superheated"), snap(7e5, ts + 30.0))
    assert value(hot, "superheat") == pytest.approx(30.0)
    assert hot.readings["deviation"].quality == bad("not_applicable")


def test_readings_cover_every_quantity_with_si_units():
    """Full evaluation returns every point quantity with its SI unit."""
    point = one(spec("superheated"), snap(7e5, 500.0))
    assert tuple(point.readings) == POINT_QUANTITIES
    units = {q: r.unit for q, r in point.readings.items()}
    assert units == {
        "pressure": "Pa",
        "temperature": "K",
        "tsat": "K",
        "superheat": "K",
        "deviation": "K",
        "enthalpy": "J/kg",
        "entropy": "J/(kg K)",
        "density": "kg/m3",
    }


def test_light_path_leaves_properties_out():
    """properties=False returns pressure, temperature, tsat, superheat and deviation only."""
    point = one(spec("superheated"), snap(7e5, 500.0), properties=False)
    assert tuple(point.readings) == POINT_QUANTITIES[:5]


# ---------------------------------------------------------------- properties


def test_saturated_point_gives_saturated_vapour_properties():
    """A saturated point reports enthalpy, entropy, density of saturated vapour at p."""
    point = one(spec(), snap(7e5, steam.tsat(801_325.0)))
    g = steam.saturated_vapour(801_325.0)
    assert (value(point, "enthalpy"), value(point, "entropy"), value(point, "density")) == (
        g.h,
        g.s,
        g.density,
    )


def test_superheated_point_gives_single_phase_properties():
    """A superheated point reports the (p, T) vapour properties."""
    point = one(spec("superheated", "absolute"), snap(4e6, 673.15))
    r = steam.properties(4e6, 673.15)
    assert (value(point, "enthalpy"), value(point, "density")) == (r.h, r.density)


def test_subcooled_point_gives_liquid_properties():
    """A subcooled point reports liquid properties (density near 900 kg/m3 at 150 degC)."""
    point = one(spec("subcooled", "absolute"), snap(1e6, 423.15))
    # common practice: hot water at 150 degC has a density of about 917 kg/m3
    assert value(point, "density") == pytest.approx(917.0, abs=2.0)


def test_state_on_the_saturation_line_is_near_saturation():
    """(p, T) on the line of a superheated point: saturated vapour, uncertain, never good."""
    point = one(spec("superheated", "absolute"), snap(1e6, steam.tsat(1e6)))
    assert point.phase == "near_saturation"
    assert point.readings["enthalpy"].value == steam.saturated_vapour(1e6).h
    assert point.readings["enthalpy"].quality == uncertain("near_saturation")
    assert point.readings["superheat"].quality == GOOD
    assert point.quality == GOOD  # the measurements stand; only the properties are in doubt


def test_temperature_outside_if97_spoils_properties_only():
    """A cold reading below 273.15 K still gives superheat; properties are outside_if97."""
    point = one(spec("subcooled", "absolute"), snap(1e6, 260.0))
    assert value(point, "superheat") == pytest.approx(260.0 - steam.tsat(1e6))
    assert point.readings["density"].quality == bad("outside_if97")


# ---------------------------------------------------------------- quality


def test_uncertain_temperature_makes_point_uncertain():
    """Quality is the worst of the inputs; the pressure keeps its own."""
    q = uncertain("out_of_range")
    point = one(spec("superheated"), snap(7e5, 500.0, tq=q))
    assert point.quality == q
    assert point.readings["superheat"].quality == q
    assert point.readings["pressure"].quality == GOOD


def test_uncertain_barometer_spoils_gauge_points_not_absolute_ones():
    """The barometer's quality counts only where it is used."""
    baro = BarometerReading(100_000.0, "altitude", uncertain("barometer_stale"))
    assert one(spec("superheated", "gauge"), snap(7e5, 500.0), baro).quality == baro.quality
    assert one(spec("superheated", "absolute"), snap(7e5, 500.0), baro).quality == GOOD


def test_missing_pressure_tag_is_no_data():
    """No pressure sample: pressure and everything after it bad, no_data."""
    point = one(spec(), snap(None, 440.0))
    assert point.quality == bad("no_data")
    assert all(
        point.readings[q] == derive_objects.reading(None, bad("no_data"), point.readings[q].unit)
        for q in ("pressure", "tsat", "superheat", "deviation", "enthalpy")
    )
    assert point.readings["temperature"].quality == GOOD


def test_missing_temperature_tag_is_no_data():
    """No temperature sample: the point is bad, pressure and tsat stay good."""
    point = one(spec(), snap(7e5, None))
    assert point.quality == bad("no_data")
    assert point.readings["tsat"].quality == GOOD
    assert point.readings["superheat"].quality == bad("no_data")
    assert point.readings["enthalpy"].quality == GOOD  # saturated vapour needs p only


def test_point_without_temperature_tag():
    """A pressure-only point gives pressure and tsat; temperature quantities are config."""
    point = one(spec(temperature=None), snap(7e5, None))
    assert point.quality == GOOD
    assert point.readings["temperature"].quality == bad("config")
    assert value(point, "tsat") == pytest.approx(steam.tsat(801_325.0))


def test_bad_sample_passes_its_reason():
    """A bad pressure sample's reason (comm_loss) becomes the point's."""
    point = one(spec(), snap(math.nan, 440.0, pq=bad("comm_loss")))
    assert point.quality == bad("comm_loss")
    assert point.readings["pressure"].value is None


@pytest.mark.parametrize("raw", [math.nan, math.inf, -math.inf])
def test_non_finite_pressure_is_not_a_number(raw):
    """NaN or inf with good quality is bad, not_a_number."""
    assert one(spec(), snap(raw, 440.0)).quality == bad("not_a_number")


def test_negative_absolute_pressure_is_out_of_range():
    """A vacuum reading larger than the barometer is impossible: out_of_range."""
    point = one(spec("subcooled", "vacuum"), snap(120_000.0, 300.0))
    assert point.quality == bad("out_of_range")


def test_pressure_above_critical_gives_supercritical_properties():
    """Above 22.064 MPa: no Tsat, but the IF97 state at (p, T), good."""
    point = one(spec("superheated", "absolute"), snap(30e6, 900.0))
    assert point.quality == GOOD and point.phase == "supercritical"
    assert point.readings["pressure"].value == 30e6
    assert point.readings["tsat"].quality == bad("supercritical")
    assert value(point, "enthalpy") == steam.properties(30e6, 900.0).h


def test_pressure_above_100_mpa_is_outside_if97():
    """Beyond the IF97 range (100 MPa) nothing is computed: outside_if97."""
    point = one(spec("superheated", "absolute"), snap(120e6, 900.0))
    assert point.quality == bad("outside_if97")


def test_bad_barometer_spoils_gauge_points():
    """A NaN barometer makes gauge pressures bad (barometer_bad)."""
    baro = BarometerReading(math.nan, "tag", GOOD)
    assert one(spec(), snap(7e5, 440.0), baro).quality == bad("barometer_bad")


def test_unknown_reference_is_config():
    """A reference that is none of absolute/gauge/vacuum is bad, config."""
    assert one(spec(reference="sealed"), snap(7e5, 440.0)).quality == bad("config")


# ---------------------------------------------------------------- never raises


QUALITIES = st.sampled_from(
    [GOOD, uncertain("out_of_range"), bad("comm_loss"), Quality(Level.GOOD, "odd")]
)


@settings(max_examples=300, deadline=None)
@given(
    p=st.floats(),
    t=st.floats(),
    baro=st.floats(),
    reference=st.sampled_from(["absolute", "gauge", "vacuum", "sealed", ""]),
    state=st.sampled_from(["saturated", "superheated", "subcooled"]),
    tolerance=st.floats(),
    pq=QUALITIES,
    tq=QUALITIES,
    bq=QUALITIES,
    p_unit=st.sampled_from(["bar", "psi", "kPa", "inHg", "furlong"]),
    t_unit=st.sampled_from(["degC", "degF", "K", "bar"]),
    band=st.one_of(st.none(), st.floats()),
)
def test_evaluate_never_raises_and_fast_path_equals_general(
    p, t, baro, reference, state, tolerance, pq, tq, bq, p_unit, t_unit, band
):
    """Any floats in: no exception, and the inline path agrees with the general one."""
    s = PointSpec(
        "drum", state, tolerance, "drum_p", reference, "drum_t", p_unit, t_unit, band=band
    )
    snapshot = snap(p, t, pq=pq, tq=tq)
    barometer = BarometerReading(baro, "tag", bq)
    for props in (True, False):
        point = evaluate([s], snapshot, barometer, properties=props)["drum"]
        assert isinstance(point.quality, Quality)
        b, q = barometer.value, barometer.quality
        if not (math.isfinite(b) and b > 0.0):
            b, q = math.nan, bad("barometer_bad")
        elif q.level is Level.BAD:
            b = math.nan
        assert point == derive.general(s, snapshot, b, q, props)[0]


@settings(max_examples=100, deadline=None)
@given(
    p=st.floats(min_value=1e3, max_value=20e6),
    sh=st.floats(min_value=-100, max_value=300),
    band=st.one_of(st.none(), st.floats(min_value=0.0, max_value=5.0)),
)
def test_fast_path_equals_general_on_plausible_plant_data(p, sh, band):
    """On realistic states the two paths give identical PointStates."""
    t = steam.tsat(p) + sh
    for state in ("saturated", "superheated", "subcooled"):
        s = PointSpec("drum", state, 2.0, "drum_p", "absolute", "drum_t", "bar", "degC", band=band)
        point = evaluate([s], snap(p, t), BARO)["drum"]
        assert point == derive.general(s, snap(p, t), BARO.value, BARO.quality, True)[0]


def test_fast_builders_equal_the_constructors():
    """The slot-filling builders make objects equal to the dataclass constructors."""
    from edge.model import PointState, Reading

    assert derive_objects.reading(1.0, GOOD, "Pa") == Reading(1.0, GOOD, "Pa")
    assert derive_objects.point_state("a", "saturated", {}, GOOD, None, "saturated") == (
        PointState("a", "saturated", {}, GOOD, None, {}, "saturated")
    )


# ---------------------------------------------------------------- compile_points


CONFIG = """
version: 1
site: test-site
barometer: {fixed: 101.325 kPa}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {name: drum_p, table: holding, address: 0, type: float32, unit: psig}
      - {name: drum_t, table: holding, address: 2, type: float32, unit: degF}
      - {name: hp_p, table: holding, address: 4, type: float32, unit: MPa, reference: absolute}
points:
  - {name: drum, pressure: drum_p, temperature: drum_t, state: saturated, tolerance: 3 K}
  - {name: hp, pressure: hp_p, state: superheated}
"""


def test_compile_points_resolves_tags():
    """Each point gets its tags' names, reference and canonical units."""
    specs = compile_points(parse_config(CONFIG))
    assert specs == [
        PointSpec(
            "drum",
            "saturated",
            3.0,
            "drum_p",
            "gauge",
            "drum_t",
            "psi",
            "degF",
            unit_has_reference=True,
        ),
        PointSpec("hp", "superheated", 2.0, "hp_p", "absolute", None, "MPa", "K"),
    ]


def test_compile_points_refuses_a_pressure_without_reference():
    """A point whose pressure tag has no reference is a config error naming the point."""
    from edge import config

    cfg = parse_config(CONFIG)
    tags = [t.model_copy(update={"reference": None}) for t in cfg.sources[0].tags]
    broken = cfg.model_copy(update={"sources": [cfg.sources[0].model_copy(update={"tags": tags})]})
    assert isinstance(broken, config.Config)
    with pytest.raises(ConfigError) as exc:
        compile_points(broken)
    assert [p.path for p in exc.value.problems] == ["points[0].pressure", "points[1].pressure"]


@settings(max_examples=300, deadline=None)
@given(
    p=st.floats(),
    t=st.floats(),
    baro=st.floats(),
    reference=st.sampled_from(["absolute", "gauge", "vacuum", "sealed", ""]),
    state=st.sampled_from(["saturated", "superheated", "subcooled"]),
    pq=QUALITIES,
    tq=QUALITIES,
    bq=QUALITIES,
    band=st.one_of(st.none(), st.floats()),
    temperature=st.sampled_from(["drum_t", None, "missing_t"]),
)
def test_properties_added_to_a_light_pass_equal_a_pass_with_them(
    p, t, baro, reference, state, pq, tq, bq, band, temperature
):
    """add_properties on the light pass gives what evaluate with properties gives."""
    from edge.derive import add_properties

    s = PointSpec("drum", state, 2.0, "drum_p", reference, temperature, "bar", "degC", band=band)
    snapshot = snap(p, t, pq=pq, tq=tq)
    barometer = BarometerReading(baro, "tag", bq)
    light = evaluate([s], snapshot, barometer, properties=False)
    assert add_properties([s], light, snapshot, barometer) == evaluate([s], snapshot, barometer)
    assert add_properties([s], {}, snapshot, barometer) == evaluate([s], snapshot, barometer)


@settings(max_examples=100, deadline=None)
@given(
    p=st.floats(min_value=1e3, max_value=30e6),
    sh=st.floats(min_value=-100, max_value=300),
    band=st.one_of(st.none(), st.floats(min_value=0.0, max_value=5.0)),
)
def test_properties_added_on_plausible_plant_data_keep_the_hint(p, sh, band):
    """Realistic states, regions 1 to 3: the same points, and a light point's hint stays."""

    from edge.derive import add_properties

    t = steam.tsat(min(p, steam.PSAT_MAX)) + sh
    for state in ("saturated", "superheated", "subcooled"):
        s = PointSpec("drum", state, 2.0, "drum_p", "absolute", "drum_t", "bar", "degC", band=band)
        light = evaluate([s], snap(p, t), BARO, properties=False)
        full = add_properties([s], light, snap(p, t), BARO)
        assert full == evaluate([s], snap(p, t), BARO)
        hinted = {"drum": light["drum"]._replace(hint="look at the unit")}
        assert add_properties([s], hinted, snap(p, t), BARO)["drum"].hint == "look at the unit"
