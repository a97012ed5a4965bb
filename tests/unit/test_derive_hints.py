"""edge.derive hints: a configuration hint only with evidence over a window of samples."""

from __future__ import annotations

import pytest

from edge import steam, units
from edge.config import parse_config
from edge.derive import EMPTY_WINDOW, PointSpec, compile_points, step
from edge.derive import hints as hint_logic
from edge.model import GOOD, BarometerReading, Sample

BARO = BarometerReading(101_325.0, "fixed", GOOD)
B = BARO.value


def spec(
    reference: str = "gauge",
    p_unit: str = "bar",
    *,
    name: str = "drum",
    ptag: str = "drum_p",
    ttag: str = "drum_t",
    t_unit: str = "degC",
    tolerance: float = 2.0,
    suffixed: bool = False,
    state: str = "saturated",
) -> PointSpec:
    return PointSpec(
        name,
        state,
        tolerance,
        ptag,
        reference,
        ttag,
        p_unit,
        t_unit,
        unit_has_reference=suffixed,
    )


def run(specs, samples):
    """Feed (tag -> value) dicts through step(); the last pass's points and window."""
    window = EMPTY_WINDOW
    points = {}
    for values in samples:
        snap = {k: Sample(k, v, GOOD, 0.0, 0.0) for k, v in values.items()}
        points, window = step(specs, snap, BARO, window)
    return points, window


def steady(raw: float, t: float, n: int = 6, ptag: str = "drum_p", ttag: str = "drum_t"):
    return [{ptag: raw, ttag: t} for _ in range(n)]


def swing(true_abs_lo: float, true_abs_hi: float, to_raw, n: int = 10, extra=None):
    """Samples of a saturated drum whose true absolute pressure ramps lo..hi; ``to_raw``
    gives the number the pressure tag delivers for a true absolute pressure."""
    out = []
    for k in range(n):
        p = true_abs_lo + (true_abs_hi - true_abs_lo) * k / (n - 1)
        values = {"drum_p": to_raw(p), "drum_t": steam.tsat(p)}
        if extra:
            values.update(extra(p))
        out.append(values)
    return out


def twin(p_true: float):
    """A second, correct transmitter on the same thermowell: point 'ref' vouches drum_t."""
    return {"ref_p": p_true - B}


REF = spec("gauge", name="ref", ptag="ref_p")


def test_gauge_reading_configured_as_absolute_with_a_vouched_thermometer():
    """A gauge transmitter set absolute, beside a correct twin on the same thermowell: the
    hint names the reference fix, and the twin's point has none."""
    p = 8e5 + B  # the steam really is at 8 barg
    samples = [{"drum_p": 8e5, "drum_t": steam.tsat(p), **twin(p)} for _ in range(6)]
    points, _ = run([spec("absolute"), REF], samples)
    h = points["drum"].hint
    assert h is not None and h.code == "reference"
    assert h.sentence == (
        "the temperature agrees if drum_p reads gauge pressure, not absolute: set reference: gauge"
    )
    assert str(h.fix) == "drum_p reference: gauge" and h.alternatives == ()
    assert points["drum"].hint_text == h.sentence
    assert points["ref"].hint is None


def test_no_hint_before_the_window_holds_enough_samples():
    """Four deviating samples are not evidence: no hint yet (MIN_SAMPLES is 5)."""
    p = 8e5 + B
    samples = [{"drum_p": 8e5, "drum_t": steam.tsat(p), **twin(p)} for _ in range(4)]
    points, window = run([spec("absolute"), REF], samples)
    assert points["drum"].hint is None and window["drum"].seen == 4


def test_steady_reference_mistake_alone_is_undecided():
    """Alone at steady pressure a reference mistake looks like a 5 K temperature offset:
    the hint says both fit and suggests no change."""
    p = 8e5 + B
    points, _ = run([spec("absolute")], steady(8e5, steam.tsat(p)))
    h = points["drum"].hint
    assert h is not None and h.code == "undecided" and h.fix is None
    assert "drum_p reads gauge pressure" in h.sentence and "offset" in h.sentence
    assert [str(f) for f in h.alternatives] == ["drum_p reference: gauge"]


def test_pressure_swing_tells_a_reference_mistake_from_an_offset():
    """A start-up ramp 1..6 barg: the shift changes with pressure as a reference mistake's
    does, so the hint names the fix."""
    points, _ = run([spec("absolute")], swing(1e5 + B, 6e5 + B, lambda p: p - B))
    h = points["drum"].hint
    assert h is not None and h.code == "reference" and str(h.fix) == "drum_p reference: gauge"


def test_steady_temperature_offset_gets_no_configuration_hint():
    """A correct point whose thermometer reads 5 K low over a ramp: no configuration fix;
    the message says a sensor or process matter."""
    samples = [
        {"drum_p": v["drum_p"], "drum_t": v["drum_t"] - 5.0}
        for v in swing(3e5 + B, 6e5 + B, lambda p: p - B)
    ]
    points, _ = run([spec("gauge")], samples)
    h = points["drum"].hint
    assert h is not None and h.fix is None and h.code == "unexplained"
    assert "no configuration mistake explains drum" in h.sentence


def test_impossible_pressure_needs_no_swing():
    """kPa read as bar makes the drum 100x too high (outside IF97): a unit hint at steady
    pressure, since no honest state has that pressure."""
    p = 8e5 + B
    raw = 800 * 1e5  # "800" is kPa, the tag says bar
    points, _ = run([spec("gauge", "bar")], steady(raw, steam.tsat(p)))
    h = points["drum"].hint
    assert h is not None and h.code == "unit" and h.fix.setting == "unit: kPa"
    assert h.sentence == "the temperature agrees if drum_p is in kPa, not bar: set unit: kPa"


def test_gauge_read_as_vacuum_is_named():
    """A gauge reading configured as vacuum comes out negative; the hint says why."""
    p = 7e5 + B
    points, _ = run([spec("vacuum")], steady(7e5, steam.tsat(p)))
    h = points["drum"].hint
    assert h is not None and "reads gauge pressure, not vacuum" in h.sentence
    assert h.fix.setting == "reference: gauge"


def test_unit_and_reference_both_wrong_are_both_named():
    """kg/cm2 gauge delivered to a tag set bar absolute: the fix names unit and reference."""
    kgcm2 = units.PRESSURE_UNITS["kg/cm2"]
    bar = units.PRESSURE_UNITS["bar"]
    samples = swing(3e5 + B, 9e5 + B, lambda p: (p - B) / kgcm2 * bar)
    points, _ = run([spec("absolute", "bar")], samples)
    h = points["drum"].hint
    assert h is not None and h.code == "unit_reference"
    assert h.fix.setting == "unit: kg/cm2, reference: gauge"


def test_fix_keeps_the_suffix_form_of_the_tag():
    """On a tag whose unit is 'kPag' the unit fix is 'unit: barg', which check accepts."""
    kpa, bar = units.PRESSURE_UNITS["kPa"], units.PRESSURE_UNITS["bar"]
    samples = swing(3e5 + B, 9e5 + B, lambda p: (p - B) / bar * kpa)  # "8" (bar) as kPa
    points, _ = run([spec("gauge", "kPa", suffixed=True)], samples)
    h = points["drum"].hint
    assert h is not None and h.fix.setting == "unit: barg"
    fixed = CONFIG.replace("unit: kPag", h.fix.setting)
    (s,) = compile_points(parse_config(fixed))
    assert (s.pressure_unit, s.reference) == ("bar", "gauge")


def test_two_fits_are_both_named():
    """With a 10 K tolerance bar and kg/cm2 both fit "bar read as kPa": either ... or."""
    kpa, bar = units.PRESSURE_UNITS["kPa"], units.PRESSURE_UNITS["bar"]
    samples = swing(3e5 + B, 9e5 + B, lambda p: (p - B) / bar * kpa)
    points, _ = run([spec("gauge", "kPa", tolerance=10.0)], samples)
    h = points["drum"].hint
    assert h is not None and h.code == "either"
    assert {f.setting for f in h.fixes} >= {"unit: bar", "unit: kg/cm2"}
    assert h.sentence.startswith("either drum_p is in ")


def test_temperature_unit_mistake_is_named():
    """A thermometer in degF configured as degC, over a load swing: the unit fix."""

    def degf_as_degc(p):
        t_true = steam.tsat(p)
        return {"drum_t": (t_true - 273.15) * 9 / 5 + 32 + 273.15}

    samples = swing(5e5 + B, 9e5 + B, lambda p: p - B, extra=degf_as_degc)
    points, _ = run([spec("gauge")], samples)
    h = points["drum"].hint
    assert h is not None and h.code == "temperature_unit"
    assert h.sentence == "the pressure agrees if drum_t is in degF, not degC: set unit: degF"


def test_mislabelled_subcooled_line_gets_no_configuration_hint():
    """Feedwater at a steady 105 degC on a 10 barg line configured saturated: no fix."""
    samples = [{"drum_p": 10e5 * (1 + 0.01 * (k % 3)), "drum_t": 378.15} for k in range(12)]
    points, _ = run([spec("gauge")], samples)
    h = points["drum"].hint
    assert h is None or h.fix is None


def test_back_inside_the_tolerance_clears_the_window():
    """One sample that agrees with the tables empties the point's evidence."""
    p = 8e5 + B
    samples = [*steady(8e5, steam.tsat(p), 4), {"drum_p": 8e5, "drum_t": steam.tsat(8e5)}]
    _, window = run([spec("absolute")], samples)
    assert "drum" not in window


def test_window_keeps_the_latest_sample_per_pressure_band():
    """Samples within 1 % of raw pressure share a band: the window keeps the latest."""
    s = spec("absolute")
    ev = None
    for raw in (8.00e5, 8.001e5, 8.002e5, 9e5):
        ev = hint_logic.observe(s, ev, raw, 450.0, B)
    assert ev.seen == 4 and [o.raw for o in ev.observations] == [8.002e5, 9e5]


def test_superheated_points_never_get_a_hint():
    """Hints are for saturated points only."""
    p = 8e5 + B
    points, window = run([spec("absolute", state="superheated")], steady(8e5, steam.tsat(p) + 5))
    assert points["drum"].hint is None and not window


def test_candidates_list_each_factor_once():
    """hPa and mbar (and mmHg and Torr) are one factor: one candidate speaks for both."""
    cands = hint_logic.candidates(spec("absolute", "bar"))
    factors = [
        (c.reference, units.PRESSURE_UNITS[c.pressure_unit])
        for c in cands
        if c.subject == "temperature"  # the pressure candidates
    ]
    assert len(factors) == len({(r, round(f, 3)) for r, f in factors})


CONFIG = """
version: 1
site: test-site
barometer: {fixed: 101.325 kPa}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {name: drum_p, table: holding, address: 0, type: float32, unit: kPag}
      - {name: drum_t, table: holding, address: 2, type: float32, unit: degC}
points:
  - {name: drum, pressure: drum_p, temperature: drum_t, state: saturated}
"""


@pytest.mark.parametrize(
    ("suffixed", "reference", "unit", "expected"),
    [
        (True, "vacuum", "inHg", "unit: inHg vac"),
        (True, "absolute", "psi", "unit: psia"),
        (False, "absolute", "psi", "unit: psi, reference: absolute"),
        (False, "gauge", "bar", "reference: gauge"),
    ],
)
def test_every_fix_form_passes_check(suffixed, reference, unit, expected):
    """A fix in the tag's own form, applied to the tag, gives the unit and reference meant."""
    s = spec("absolute" if reference != "absolute" else "gauge", "bar", suffixed=suffixed)
    (c,) = [
        c for c in hint_logic.candidates(s) if c.reference == reference and c.pressure_unit == unit
    ]
    assert c.fix.setting == expected
    tag = "unit: barg" if suffixed else "unit: bar, reference: gauge"
    if not suffixed and s.reference == "absolute":
        tag = "unit: bar, reference: absolute"
    line = CONFIG.replace("unit: kPag", tag)
    settings = dict(part.split(": ") for part in expected.split(", "))
    new_tag = ", ".join(
        f"{k}: {settings.get(k, v)}" for k, v in (part.split(": ") for part in tag.split(", "))
    )
    for k, v in settings.items():
        if k not in new_tag:
            new_tag += f", {k}: {v}"
    (ps,) = compile_points(parse_config(line.replace(tag, new_tag)))
    assert (ps.pressure_unit, ps.reference) == (unit, reference)


RUNTIME_CONFIG = """
version: 1
site: test-site
barometer: {fixed: 101.325 kPa}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {name: drum_p, table: holding, address: 0, type: float32, unit: kPa, reference: gauge}
      - {name: drum_t, table: holding, address: 2, type: float32, unit: degC}
points:
  - {name: drum, pressure: drum_p, temperature: drum_t, state: saturated}
"""


def test_runtime_keeps_the_window_between_passes_and_a_reload_clears_it():
    """The runtime carries the evidence from pass to pass; the property view carries the
    same hint; a new plan starts with an empty window."""
    from edge.evaluation import Runtime, compile_plan

    plan = compile_plan(parse_config(RUNTIME_CONFIG, "c.yaml"))
    rt = Runtime(plan)
    p = 8e5 + B
    for k in range(6):  # "800" kPa delivered as bar-valued 8.0 by a transmitter in bar
        rt.ingest([
            Sample("drum_p", 8.0 * 1e3, GOOD, float(k), float(k)),  # 8 (bar) read as kPa
            Sample("drum_t", steam.tsat(p), GOOD, float(k), float(k)),
        ])  # fmt: skip
        rt.evaluate(float(k))
    assert rt.evidence["drum"].seen == 6
    light = rt.light["drum"].hint
    assert light is not None and rt.points["drum"].hint == light
    rt.swap(compile_plan(parse_config(RUNTIME_CONFIG, "c.yaml")), 7.0)
    assert not rt.evidence


def test_points_json_carries_phase_sentence_and_structured_hint():
    """The API's point: measured phase, the hint's sentence and its structured detail."""
    from edge.web.api import point_json

    p = 8e5 + B
    samples = [{"drum_p": 8e5, "drum_t": steam.tsat(p), **twin(p)} for _ in range(6)]
    points, _ = run([spec("absolute"), REF], samples)
    body = point_json(points["drum"])
    assert body["phase"] == "superheated"  # 4 K above the Tsat the wrong reference gives
    assert body["hint"] == points["drum"].hint.sentence
    assert body["hint_detail"]["code"] == "reference"
    assert body["hint_detail"]["fix"] == {"tag": "drum_p", "set": "reference: gauge"}
    assert body["hint_detail"]["alternatives"] == []
    assert 0.5 <= body["hint_detail"]["confidence"] <= 1.0
    assert point_json(points["ref"])["hint_detail"] is None
