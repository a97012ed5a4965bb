"""The flows[] config section (models, checks with lines) and one evaluation pass over it."""

from __future__ import annotations

import math
import textwrap

import pytest

from edge import steam
from edge.config import parse_config
from edge.errors import ConfigError
from edge.evaluation import Runtime, compile_plan
from edge.model import GOOD, Level, Sample, bad

BASE = """\
version: 1
site: test-works
barometer: {fixed: 101.325 kPa}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    tags:
      - {name: main_p, table: holding, address: 0, type: float32, unit: bara}
      - {name: main_t, table: holding, address: 2, type: float32, unit: degC}
      - {name: main_dp, table: holding, address: 4, type: float32, unit: kPa,
         reference: differential}
      - {name: vortex_q, table: holding, address: 6, type: float32, unit: m3/h}
      - {name: fw_p, table: holding, address: 8, type: float32, unit: bara}
      - {name: fw_t, table: holding, address: 10, type: float32, unit: degC}
      - {name: gas_q, table: holding, address: 12, type: float32, unit: m3/h}
points:
  - {name: main, pressure: main_p, temperature: main_t, state: superheated}
  - {name: feedwater, pressure: fw_p, temperature: fw_t, state: subcooled}
flows:
  - name: main-orifice
    meter: orifice
    point: main
    dp: main_dp
    taps: flange
    pipe: 102.26 mm
    bore: 60 mm
    pipe_material: carbon_steel
    bore_material: stainless_316
    energy_reference: {point: feedwater}
    fuel: {tag: gas_q, heating_value: 36 MJ/m3, basis: gross}
  - name: main-vortex
    meter: volumetric
    point: main
    signal: vortex_q
"""


def problems(text: str) -> list[str]:
    with pytest.raises(ConfigError) as info:
        parse_config(textwrap.dedent(text), "c.yaml")
    return [str(p) for p in info.value.problems]


def test_flows_parse():
    """A config with an orifice and a vortex flow loads; diameters are in metres."""
    config = parse_config(BASE, "c.yaml")
    assert [f.name for f in config.flows] == ["main-orifice", "main-vortex"]
    assert config.flows[0].pipe == pytest.approx(0.10226)
    assert config.flows[0].bore == pytest.approx(0.060)


def test_orifice_without_taps_is_an_error_with_its_line():
    """An orifice without taps is reported at the flow's line."""
    text = BASE.replace("    taps: flange\n", "")
    assert "c.yaml:21: flows[0].taps: an orifice needs taps: corner, flange or d_d2" in problems(
        text
    )


def test_dp_tag_must_be_differential():
    """A dp tag that reads a line pressure is refused."""
    text = BASE.replace("dp: main_dp", "dp: main_p")
    found = problems(text)
    assert any(
        "flows[0].dp: tag 'main_p' must be a pressure with reference: differential" in p
        for p in found
    )


def test_point_cannot_use_a_differential_tag():
    """A point whose pressure tag is differential is refused."""
    text = BASE.replace("{name: main, pressure: main_p", "{name: main, pressure: main_dp")
    assert any("reads a differential pressure" in p for p in problems(text))


def test_bore_larger_than_pipe():
    """A bore at least as large as the pipe is refused."""
    text = BASE.replace("bore: 60 mm", "bore: 110 mm")
    assert any(
        "the bore (110 mm) must be smaller than the pipe (102.26 mm)" in p for p in problems(text)
    )


def test_unknown_material_and_signal_unit():
    """An unknown material and a volumetric flow on a mass-flow unit are both reported."""
    text = BASE.replace("pipe_material: carbon_steel", "pipe_material: cheese").replace(
        "unit: m3/h}\n      - {name: fw_p", "unit: t/h}\n      - {name: fw_p"
    )
    found = problems(text)
    assert any("flows[0].pipe_material: unknown material 'cheese'" in p for p in found)
    assert any("flows[1].signal: tag 'vortex_q' has unit 't/h'" in p for p in found)


def test_unknown_key():
    """A typo in a flow's key is an error naming it."""
    text = BASE.replace("    signal: vortex_q\n", "    signal: vortex_q\n    sigal: x\n")
    assert any("flows[1]" in p and "sigal" in p for p in problems(text))


def test_duplicate_name():
    """Two flows of one name are refused."""
    text = BASE.replace("name: main-vortex", "name: main-orifice")
    assert any("duplicate flow name 'main-orifice'" in p for p in problems(text))


def test_reference_point_must_be_subcooled():
    """An energy reference point that is not subcooled water is refused."""
    text = BASE.replace("energy_reference: {point: feedwater}", "energy_reference: {point: main}")
    assert any("must be a subcooled point" in p for p in problems(text))


def _samples(now: float, **values: float) -> list[Sample]:
    return [Sample(tag, v, GOOD, now, now) for tag, v in values.items()]


def _runtime() -> Runtime:
    return Runtime(compile_plan(parse_config(BASE, "c.yaml")))


def _good(now: float) -> list[Sample]:
    return _samples(
        now,
        main_p=10e5,
        main_t=473.15,
        main_dp=25e3,
        vortex_q=0.2,
        fw_p=12e5,
        fw_t=378.15,
        gas_q=0.07,
    )


def test_evaluation_pass_computes_flows():
    """One pass computes the orifice (with thermal expansion) and the vortex flow, the energy
    rate above the feedwater and the boiler efficiency."""
    rt = _runtime()
    rt.ingest(_good(100.0))
    rt.evaluate(100.0)
    orifice = rt.flows["main-orifice"]
    assert orifice.quality.good
    assert orifice.result.pipe == pytest.approx(0.10226 * (1 + 11.16e-6 * 180))
    assert 0.85 < orifice.mass_flow < 0.95
    h = steam.properties(10e5, 473.15).h
    h_fw = steam.properties(12e5, 378.15).h
    assert orifice.energy_rate == pytest.approx(orifice.mass_flow * (h - h_fw))
    assert orifice.efficiency == pytest.approx(orifice.energy_rate / (0.07 * 36e6))
    vortex = rt.flows["main-vortex"]
    assert vortex.mass_flow == pytest.approx(0.2 * steam.properties(10e5, 473.15).density)


def test_wet_steam_makes_the_flow_bad():
    """Clearly below Tsat (past the point's 2 K band, derive's phase judgement) the
    superheated main's flows are bad with reason wet_steam."""
    rt = _runtime()
    rt.ingest([*_good(100.0), *_samples(100.0, main_t=steam.tsat(10e5) - 3.0)])
    rt.evaluate(100.0)
    for f in rt.flows.values():
        assert f.quality.level is Level.BAD
        assert f.quality.reason == "wet_steam"
        assert f.mass_flow is None


def test_near_saturation_is_uncertain_on_dry_saturated_vapour():
    """Within the band around Tsat the flow is uncertain (near_saturation) and uses dry
    saturated vapour at the pressure, as derive's properties do."""
    rt = _runtime()
    rt.ingest([*_good(100.0), *_samples(100.0, main_t=steam.tsat(10e5) - 1.0)])
    rt.evaluate(100.0)
    f = rt.flows["main-vortex"]
    assert (f.quality.level, f.quality.reason) == (Level.UNCERTAIN, "near_saturation")
    assert f.fluid.density == pytest.approx(steam.saturated_vapour(10e5).density)
    assert f.mass_flow == pytest.approx(0.2 * steam.saturated_vapour(10e5).density)


def test_outside_limits_is_uncertain_with_reason():
    """A dp giving p2/p1 below 0.75 leaves the figure uncertain, naming the limit."""
    rt = _runtime()
    rt.ingest(_good(100.0) + _samples(100.0, main_dp=300e3))
    rt.evaluate(100.0)
    f = rt.flows["main-orifice"]
    assert f.quality.level is Level.UNCERTAIN
    assert f.quality.reason == "outside_limits:pressure_ratio"
    assert f.mass_flow > 0


def test_bad_dp_tag_is_bad_flow_and_not_counted():
    """A bad dp makes the orifice flow bad; its totals count the time as not measured."""
    rt = _runtime()
    for now in (100.0, 101.0, 102.0):
        rt.ingest(_good(now))
        rt.evaluate(now)
    good_mass = rt.totals["main-orifice"].mass
    for now in (103.0, 104.0):
        rt.ingest([*_good(now), Sample("main_dp", math.nan, bad("comm_loss"), now, now)])
        rt.evaluate(now)
    t = rt.totals["main-orifice"]
    assert rt.flows["main-orifice"].quality.reason == "comm_loss"
    assert t.mass == good_mass
    assert t.not_measured == pytest.approx(2.0)
    assert rt.totals["main-vortex"].not_measured == 0.0


def test_metrics_leave_out_a_bad_flow_but_keep_its_totals():
    """A bad flow has no rate series (quality says 0); its counters stay."""
    from edge.web.metrics import LiveView, families

    rt = _runtime()
    for now in (100.0, 101.0):
        rt.ingest(_good(now))
        rt.evaluate(now)
    rt.ingest([*_good(102.0), *_samples(102.0, main_t=steam.tsat(10e5) - 3.0)])
    rt.evaluate(102.0)
    view = LiveView("0", "s", {}, None, [], {}, flows=rt.flows, totals=rt.totals)
    fams = {f.name: f for f in families(view)}
    mass = {v[0]: x for _, v, x in fams["steamedge_flow_mass_kilograms_per_second"].samples}
    quality = {v[0]: x for _, v, x in fams["steamedge_flow_quality"].samples}
    totals = {v[0]: x for _, v, x in fams["steamedge_flow_mass_kilograms"].samples}
    assert mass == {}
    assert quality == {"main-orifice": 0, "main-vortex": 0}
    assert totals["main-vortex"] == pytest.approx(rt.totals["main-vortex"].mass)
    assert totals["main-vortex"] > 0


def test_saturated_main_uses_dry_saturated_vapour():
    """On a saturated point the steam is dry saturated vapour at the point's pressure."""
    text = BASE.replace(
        "temperature: main_t, state: superheated", "temperature: main_t, state: saturated"
    )
    rt = Runtime(compile_plan(parse_config(text, "c.yaml")))
    rt.ingest([*_good(100.0), *_samples(100.0, main_t=steam.tsat(10e5) + 0.3)])
    rt.evaluate(100.0)
    f = rt.flows["main-vortex"]
    assert f.quality.good
    assert f.mass_flow == pytest.approx(0.2 * steam.saturated_vapour(10e5).density)
    assert f.fluid.enthalpy == pytest.approx(steam.saturated_vapour(10e5).h)


def test_reload_keeps_totals_of_flows_that_stay():
    """A new plan keeps the totals of flows of the same name and drops removed ones."""
    rt = _runtime()
    for now in (100.0, 101.0, 102.0):
        rt.ingest(_good(now))
        rt.evaluate(now)
    kept = rt.totals["main-orifice"]
    text = BASE[: BASE.index("  - name: main-vortex")]
    rt.swap(compile_plan(parse_config(text, "c.yaml")), 102.5)
    assert set(rt.totals) == {"main-orifice"}
    assert rt.totals["main-orifice"] == kept
    assert set(rt.flows) == {"main-orifice"}


def test_check_lists_the_flows(capsys):
    """steam-edge check prints each flow with its meter, tag and point."""
    from pathlib import Path

    from edge.cli import main

    demo = Path(__file__).resolve().parents[2] / "config" / "demo.yaml"
    assert main(["check", "-c", str(demo)]) == 0
    out = capsys.readouterr().out
    assert "flows (2):" in out
    assert (
        "  main-orifice: orifice (flange) on dp main_dp, pipe 128.2 mm, bore 75 mm, at point header"
        in out
    )
    assert "  main-vortex: volumetric on signal vortex_q, at point header" in out


def test_live_stream_figures_of_flows():
    """The page's live stream gets each flow as [t/h, kW, t, GJ, s, quality code] and its
    texts; a bad flow has null rates and keeps its totals."""
    from edge.web.flows import flow_texts, live_flows

    rt = _runtime()
    for now in (100.0, 101.0):
        rt.ingest(_good(now))
        rt.evaluate(now)
    live = live_flows(rt)
    vortex = rt.flows["main-vortex"]
    assert live["main-vortex"][0] == pytest.approx(vortex.mass_flow * 3.6, abs=1e-4)
    assert live["main-vortex"][2] == pytest.approx(rt.totals["main-vortex"].mass / 1e3, abs=1e-4)
    assert live["main-vortex"][5] == 2
    rt.ingest([*_good(102.0), *_samples(102.0, main_t=steam.tsat(10e5) - 3.0)])
    rt.evaluate(102.0)
    live = live_flows(rt)
    assert live["main-vortex"][:2] == [None, None]
    assert live["main-vortex"][5] == 0
    assert flow_texts(rt)["main-vortex"] == {
        "meter": "volumetric",
        "point": "main",
        "quality": "bad",
        "reason": "wet_steam",
    }
