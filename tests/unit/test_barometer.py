"""edge.barometer: fixed, altitude and live-tag barometric pressure with fallback."""

from __future__ import annotations

import math

import pytest

from edge import config
from edge.barometer import (
    BarometerSpec,
    compile_barometer,
    from_absolute,
    resolve,
    standard_atmosphere,
    to_absolute,
)
from edge.errors import ConfigError
from edge.model import GOOD, Level, Sample, bad, uncertain

NOW = 1_800_000_000.0


def sample(value: float, *, age: float = 1.0, quality=GOOD, tag: str = "baro") -> Sample:
    return Sample(tag, value, quality, NOW - age, NOW - age)


def live(**kwargs) -> BarometerSpec:
    return compile_barometer(config.Barometer(altitude="420 m", tag="baro", **kwargs))


def test_standard_atmosphere_at_1000_m():
    """1000 m in the standard atmosphere is 89.87 kPa."""
    # ICAO standard atmosphere / ISO 2533
    assert standard_atmosphere(1000.0) == pytest.approx(89_870.0, abs=10.0)


@pytest.mark.parametrize(("altitude", "hpa"), [(0.0, 1013.25), (500.0, 954.61), (2000.0, 795.0)])
def test_standard_atmosphere_table(altitude, hpa):
    """Sea level, 500 m and 2000 m match the standard atmosphere table."""
    # ICAO standard atmosphere / ISO 2533 (table values from memory)
    assert standard_atmosphere(altitude) / 100.0 == pytest.approx(hpa, abs=0.1)


def test_fixed_value_is_used_with_good_quality():
    """A fixed barometer without a tag is good and says it is fixed."""
    spec = compile_barometer(config.Barometer(fixed="100.8 kPa"))
    reading = resolve(spec, {}, NOW)
    assert (reading.value, reading.origin, reading.quality) == (100_800.0, "fixed", GOOD)


def test_altitude_value_is_used_with_good_quality():
    """An altitude barometer gives the standard-atmosphere value, origin altitude."""
    spec = compile_barometer(config.Barometer(altitude="1000 m"))
    reading = resolve(spec, {}, NOW)
    assert reading.origin == "altitude"
    assert reading.value == pytest.approx(standard_atmosphere(1000.0))
    assert reading.quality == GOOD


def test_live_tag_inside_band_is_used():
    """A fresh, plausible, good tag wins over the altitude value."""
    reading = resolve(live(), {"baro": sample(99_100.0)}, NOW)
    assert (reading.value, reading.origin, reading.quality) == (99_100.0, "tag", GOOD)


def test_uncertain_tag_is_used_and_stays_uncertain():
    """An uncertain but plausible tag is used and passes its quality on."""
    q = uncertain("out_of_range")
    reading = resolve(live(), {"baro": sample(99_100.0, quality=q)}, NOW)
    assert (reading.origin, reading.quality) == ("tag", q)


def test_stale_tag_falls_back_with_reason():
    """A tag older than max_age gives the altitude value, uncertain, barometer_stale."""
    reading = resolve(live(max_age="60 s"), {"baro": sample(99_100.0, age=61.0)}, NOW)
    assert reading.origin == "altitude"
    assert reading.value == pytest.approx(standard_atmosphere(420.0))
    assert reading.quality == uncertain("barometer_stale")


def test_frozen_source_timestamp_is_stale_though_received_just_now():
    """A value re-delivered fresh but stamped by its source long ago is stale."""
    frozen = Sample("baro", 99_100.0, GOOD, NOW - 61.0, NOW - 0.5)
    reading = resolve(live(max_age="60 s"), {"baro": frozen}, NOW)
    assert (reading.origin, reading.quality) == ("altitude", uncertain("barometer_stale"))


def test_tag_exactly_max_age_old_is_still_used():
    """The age limit is inclusive."""
    reading = resolve(live(max_age="60 s"), {"baro": sample(99_100.0, age=60.0)}, NOW)
    assert reading.origin == "tag"


@pytest.mark.parametrize("value", [76_090.0, 104_640.0, 1013.0, -5.0])
def test_implausible_tag_falls_back(value):
    """A tag outside the band at 420 m, 80-110 kPa scaled by the standard atmosphere there
    (96.38 kPa, ISO 2533): 76.10-104.63 kPa (a unit mix-up, a dead transmitter), is refused."""
    reading = resolve(live(), {"baro": sample(value)}, NOW)
    assert reading.origin == "altitude"
    assert reading.quality == uncertain("barometer_implausible")


def test_configured_band_replaces_the_default():
    """barometer.plausible narrows or widens the accepted band."""
    spec = live(plausible=["95 kPa", "105 kPa"])
    assert resolve(spec, {"baro": sample(94_000.0)}, NOW).quality.reason == "barometer_implausible"
    assert resolve(spec, {"baro": sample(96_000.0)}, NOW).origin == "tag"


@pytest.mark.parametrize(
    ("snapshot", "reason"),
    [
        ({}, "barometer_no_data"),
        ({"baro": sample(math.nan, quality=bad("comm_loss"))}, "barometer_bad"),
        ({"baro": sample(math.nan)}, "barometer_bad"),
        ({"baro": sample(math.inf)}, "barometer_bad"),
    ],
)
def test_missing_or_bad_tag_falls_back(snapshot, reason):
    """No sample or a bad one gives the fallback with the reason."""
    reading = resolve(live(), snapshot, NOW)
    assert reading.origin == "altitude"
    assert reading.quality == uncertain(reason)


def test_fixed_fallback_keeps_origin_fixed():
    """With a fixed value, a failed tag falls back to origin fixed."""
    spec = compile_barometer(config.Barometer(fixed="101.0 kPa", tag="baro"))
    reading = resolve(spec, {}, NOW)
    assert (reading.value, reading.origin) == (101_000.0, "fixed")
    assert reading.quality.level is Level.UNCERTAIN


def test_tag_only_falls_back_to_standard_atmosphere():
    """With only a tag configured, a failure falls back to 101325 Pa, uncertain."""
    spec = compile_barometer(config.Barometer(tag="baro"))
    reading = resolve(spec, {"baro": sample(99_000.0, age=1e6)}, NOW)
    assert (reading.value, reading.origin) == (101_325.0, "fixed")
    assert reading.quality == uncertain("barometer_stale")


def test_nothing_configured_is_standard_atmosphere_uncertain():
    """An empty barometer section gives 101325 Pa, uncertain, barometer_default."""
    reading = resolve(compile_barometer(config.Barometer()), {}, NOW)
    assert (reading.value, reading.quality) == (101_325.0, uncertain("barometer_default"))


def test_nan_time_is_stale_not_an_exception():
    """A NaN clock reading never passes as fresh."""
    reading = resolve(live(), {"baro": sample(99_000.0)}, math.nan)
    assert reading.quality == uncertain("barometer_stale")


@pytest.mark.parametrize(
    ("kwargs", "path"),
    [
        ({"fixed": "1013 kPa"}, "barometer.fixed"),  # meant hPa
        ({"fixed": "14.7 psig"}, "barometer.fixed"),
        ({"altitude": "20000 m"}, "barometer.altitude"),
        ({"fixed": "60 kPa", "plausible": ["80 kPa", "110 kPa"]}, "barometer.fixed"),
        ({"fixed": "100 kPa", "altitude": "10 m"}, "barometer"),
        ({"fixed": "100 kPa", "plausible": ["110 kPa", "90 kPa"]}, "barometer.plausible"),
    ],
)
def test_config_mistakes_raise_config_error_with_path(kwargs, path):
    """Unit slips, gauge values and impossible settings are config errors naming the key."""
    with pytest.raises(ConfigError) as exc:
        compile_barometer(config.Barometer(**kwargs))
    assert any(p.path == path for p in exc.value.problems)


def test_high_site_needs_no_settings():
    """A site at 3000 m works as it is: the default band is centred on its own standard
    atmosphere, 70.11 kPa (ICAO / ISO 2533, 3000 m geopotential), and 80..110 kPa scaled by
    70.11/101.325."""
    spec = compile_barometer(config.Barometer(altitude="3000 m"))
    assert spec.fallback == pytest.approx(70_109.0, abs=5.0)
    assert (spec.low, spec.high) == pytest.approx((55_354.0, 76_111.0), abs=5.0)


def test_live_value_outside_the_high_sites_band_falls_back():
    """At 3000 m a live 101 kPa (a sea-level value: a wrong transmitter) is implausible."""
    spec = compile_barometer(config.Barometer(altitude="3000 m", tag="baro"))
    reading = resolve(spec, {"baro": sample(101_000.0)}, NOW)
    assert reading.quality == uncertain("barometer_implausible")


def test_high_site_with_its_own_band_is_accepted():
    """A site at 3000 m works once its plausible band is set."""
    spec = compile_barometer(config.Barometer(altitude="3000 m", plausible=["60 kPa", "80 kPa"]))
    assert resolve(spec, {}, NOW).value == pytest.approx(standard_atmosphere(3000.0))


@pytest.mark.parametrize(
    ("value", "reference", "absolute"),
    [
        (700_000.0, "gauge", 796_380.0),  # 7 barg at 420 m: reading + barometer
        (84_660.0, "vacuum", 11_720.0),  # 25 inHg vac (84.66 kPa): barometer - reading
        (500_000.0, "absolute", 500_000.0),
        (500_000.0, None, 500_000.0),  # no reference: taken as it is
    ],
)
def test_reference_conversion_round_trips(value, reference, absolute):
    """Gauge, vacuum and absolute readings to absolute and back, against a 96.38 kPa
    barometer (the standard atmosphere at 420 m, ISO 2533)."""
    baro = 96_380.0
    assert to_absolute(value, reference, baro) == pytest.approx(absolute)
    assert from_absolute(absolute, reference, baro) == pytest.approx(value)
