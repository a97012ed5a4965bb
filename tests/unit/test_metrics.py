"""The metrics collector: live state at scrape time, a fresh registry per test."""

from __future__ import annotations

from prometheus_client import generate_latest
from prometheus_client.parser import text_string_to_metric_families

from edge.model import GOOD, BarometerReading, PointState, Reading, bad, uncertain
from edge.sources.base import SourceHealth
from edge.web.exposition import render
from edge.web.metrics import AlarmRow, LiveView, build_registry, families


def _point(name: str, p: float | None, t: float, quality=GOOD, hint=None) -> PointState:
    pq = quality if p is None else GOOD
    readings = {
        "pressure": Reading(p, pq, "Pa"),
        "temperature": Reading(t, GOOD, "K"),
        "tsat": Reading(None if p is None else 453.0, pq, "K"),
        "superheat": Reading(None if p is None else t - 453.0, pq, "K"),
    }
    return PointState(name, "superheated", readings, quality, hint)


def _view(**over) -> LiveView:
    health = SourceHealth(up=True, delivered=True)
    health.observe_read(0.004, now=1000.0)
    health.observe_read(0.2, now=1001.0)
    health.count_error("timeout")
    base = dict(
        version="9.9.9",
        site="riverside-laundry",
        points={
            "drum": _point("drum", 1.0e6, 463.15),
            "hp_header": _point("hp_header", None, 700.0, bad("comm_loss")),
        },
        barometer=BarometerReading(97_000.0, "tag"),
        alarms=[
            AlarmRow("drum-low", "critical", "unacknowledged", True, True, False, False),
            AlarmRow("hp-low", "high", "shelved", False, False, True, False),
        ],
        sources={"boiler-plc": health},
        notifications_pending={"oncall": 3},
        alarm_health={"raised_10m": 12, "flood": 1, "chattering": 1},
    )
    base.update(over)
    return LiveView(**base)


def _served(view: LiveView) -> str:
    """The text /metrics serves for ``view``: the app's own families and renderer."""
    return render(families(view)).decode()


def _samples(view: LiveView) -> dict[tuple[str, tuple], float]:
    text = _served(view)
    out = {}
    for fam in text_string_to_metric_families(text):
        for s in fam.samples:
            out[(s.name, tuple(sorted(s.labels.items())))] = s.value
    return out


def test_info_says_advisory_mode():
    """steamedge_info is 1 with mode="advisory" and a help text saying advisory only."""
    view = _view()
    text = _served(view)
    assert "ADVISORY ONLY" in text
    s = _samples(view)
    key = (("mode", "advisory"), ("site", "riverside-laundry"), ("version", "9.9.9"))
    assert s[("steamedge_info", key)] == 1


def test_good_point_exports_converted_values():
    """Pressure in Pa, temperatures in Celsius, superheat in kelvin."""
    s = _samples(_view())
    drum = (("point", "drum"),)
    assert s[("steamedge_pressure_absolute_pascals", drum)] == 1.0e6
    assert abs(s[("steamedge_temperature_celsius", drum)] - 190.0) < 1e-9
    assert abs(s[("steamedge_saturation_temperature_celsius", drum)] - 179.85) < 1e-9
    assert abs(s[("steamedge_superheat_kelvin", drum)] - 10.15) < 1e-9
    assert s[("steamedge_point_quality", drum)] == 2


def test_bad_value_is_not_exported_but_quality_says_why():
    """A bad reading has no series; quality 0 and its reason are exported instead."""
    s = _samples(_view())
    hp = (("point", "hp_header"),)
    assert ("steamedge_pressure_absolute_pascals", hp) not in s
    assert ("steamedge_superheat_kelvin", hp) not in s
    assert s[("steamedge_point_quality", hp)] == 0
    assert s[("steamedge_point_quality_reason", (("point", "hp_header"), ("reason", "comm_loss")))]


def test_barometer_origin_label():
    """The barometric value carries its origin."""
    s = _samples(_view(barometer=BarometerReading(96_500.0, "altitude", uncertain("x"))))
    assert s[("steamedge_barometric_pressure_pascals", (("origin", "altitude"),))] == 96_500.0
    assert s[("steamedge_barometer_quality", (("origin", "altitude"),))] == 1


def test_alarm_series_by_name_and_priority():
    """Active, unacknowledged and shelved are exported per alarm with its priority."""
    s = _samples(_view())
    drum = (("alarm", "drum-low"), ("priority", "critical"))
    hp = (("alarm", "hp-low"), ("priority", "high"))
    assert s[("steamedge_alarm_active", drum)] == 1
    assert s[("steamedge_alarm_unacknowledged", drum)] == 1
    assert s[("steamedge_alarm_shelved", hp)] == 1
    assert s[("steamedge_alarm_state", (*hp, ("state", "shelved")))] == 1


def test_source_histogram_and_error_counter():
    """Read durations land in the right buckets; errors are counted by kind."""
    s = _samples(_view())
    src = (("source", "boiler-plc"),)
    assert s[("steamedge_source_up", src)] == 1
    assert s[("steamedge_source_read_seconds_count", src)] == 2
    assert s[("steamedge_source_read_seconds_bucket", (("le", "0.005"), *src))] == 1
    assert s[("steamedge_source_read_seconds_bucket", (("le", "0.25"), *src))] == 2
    assert abs(s[("steamedge_source_read_seconds_sum", src)] - 0.204) < 1e-12
    assert s[("steamedge_source_errors_total", (("kind", "timeout"), *src))] == 1


def test_alarm_system_health_and_notifications():
    """Alarm rate, flood, chattering and pending notifications are exported."""
    s = _samples(_view())
    assert s[("steamedge_alarms_raised_10m", ())] == 12
    assert s[("steamedge_alarm_flood", ())] == 1
    assert s[("steamedge_alarms_chattering", ())] == 1
    assert s[("steamedge_notifications_pending", (("channel", "oncall"),))] == 3


def test_hint_exports_the_proposed_fix_as_label():
    """A commissioning hint becomes a bounded label naming the fix."""
    text = (
        "the temperature agrees if drum_p reads gauge pressure, not absolute: set reference: gauge"
    )
    view = _view(points={"drum": _point("drum", 1.0e6, 463.15, hint=text)})
    s = _samples(view)
    assert s[("steamedge_point_hint", (("fix", "reference: gauge"), ("point", "drum")))] == 1


def test_structured_hint_label_is_its_fix():
    """A Hint's label is its fix as the tag writes it; either/or joins every fix; a hint
    that proposes no change is not exported."""
    from edge.model import Fix, Hint

    one = Hint("unit", "...", Fix("drum_p", "unit: barg"))
    both = Hint("either", "...", Fix("drum_p", "unit: bar"), (Fix("drum_p", "unit: kg/cm2"),))
    none = Hint("unexplained", "no configuration mistake explains drum")
    points = {
        "a": _point("a", 1.0e6, 463.15, hint=one),
        "b": _point("b", 1.0e6, 463.15, hint=both),
        "c": _point("c", 1.0e6, 463.15, hint=none),
    }
    s = _samples(_view(points=points))
    assert s[("steamedge_point_hint", (("fix", "unit: barg"), ("point", "a")))] == 1
    assert s[("steamedge_point_hint", (("fix", "unit: bar | unit: kg/cm2"), ("point", "b")))] == 1
    assert not any(k[0] == "steamedge_point_hint" and ("point", "c") in k[1] for k in s)


def test_scrape_reads_live_state():
    """A second scrape sees the state as it is then, not as it was registered."""
    state = {"view": _view()}
    registry = build_registry(lambda: state["view"])
    generate_latest(registry)
    state["view"] = _view(points={})
    assert b"steamedge_pressure_absolute_pascals{" not in generate_latest(registry)


def _parsed(text: str) -> dict:
    out = {}
    for fam in text_string_to_metric_families(text):
        out[(fam.name, fam.type, fam.documentation)] = sorted(
            (s.name, tuple(sorted(s.labels.items())), s.value) for s in fam.samples
        )
    return out


def test_fast_exposition_matches_prometheus_client():
    """The /metrics renderer says exactly what generate_latest says for the same view."""
    from edge.web.exposition import render
    from edge.web.metrics import families

    hint = "the temperature agrees if x is in psi, not bar: set unit: psi"
    view = _view(points={**_view().points, "d2": _point("d2", 2e5, 400.0, hint=hint)})
    fast = render(families(view)).decode()
    reference = generate_latest(build_registry(lambda: view)).decode()
    assert _parsed(fast) == _parsed(reference)
    assert fast.count("\n") == reference.count("\n")


def test_label_values_are_escaped():
    """Quotes, backslashes and newlines in label values are escaped as the format requires."""
    from edge.web.exposition import render
    from edge.web.metrics import families

    view = _view(site='river "side"\\\nlaundry')
    fast = render(families(view)).decode()
    assert 'site="river \\"side\\"\\\\\\nlaundry"' in fast
    assert _parsed(fast) == _parsed(generate_latest(build_registry(lambda: view)).decode())


def test_render_writes_each_scrape_from_the_values_of_that_scrape():
    """Cached series prefixes never hold a value: a changed value shows at once."""
    from edge.web.exposition import render
    from edge.web.metrics import Family

    fam = Family("steamedge_x", "gauge", "x.", ("point",))
    fam.add(("a",), 1.5)
    first = render([fam]).decode()
    fam.samples[0] = ("", ("a",), 2.0)
    second = render([fam]).decode()
    assert 'steamedge_x{point="a"} 1.5\n' in first and 'steamedge_x{point="a"} 2.0\n' in second


def test_render_prefix_table_stays_bounded():
    """Series seen once (e.g. before a reload) do not pile up past the table's limit."""
    from edge.web import exposition
    from edge.web.metrics import Family

    limit = exposition._LIMIT
    exposition._LIMIT = 100
    try:
        for round_ in range(5):
            fam = Family("steamedge_y", "gauge", "y.", ("point",))
            for i in range(60):
                fam.add((f"p{round_}-{i}",), float(i))
            text = exposition.render([fam]).decode()
            assert text.count("\n") == 62
        assert sum(len(t) for t in exposition._PREFIXES.values()) <= 160
    finally:
        exposition._LIMIT = limit


def test_alarm_text_is_reused_while_rows_stand_still_and_follows_a_change():
    """The alarm families are handed out again while the rows compare equal; a changed
    flag shows in the very next scrape, and every scrape says what generate_latest says."""
    rows = [AlarmRow(f"a{i}", "high", "normal", False, False, False, False) for i in range(50)]
    first = families(_view(alarms=rows))
    again = families(_view(alarms=list(rows)))
    pick = next(f for f in again if f.name == "steamedge_alarm_active")
    assert pick in first and pick.kept  # the same family object, samples and all
    assert _served(_view(alarms=rows)) == _served(_view(alarms=list(rows)))
    changed = [*rows[:7], AlarmRow("a7", "high", "unacknowledged", True, True, False, False)]
    changed += rows[8:]
    view = _view(alarms=changed)
    text = _served(view)
    assert 'steamedge_alarm_active{alarm="a7",priority="high"} 1.0\n' in text
    assert 'steamedge_alarm_state{alarm="a7",priority="high",state="unacknowledged"} 1.0' in text
    assert _parsed(text) == _parsed(generate_latest(build_registry(lambda: view)).decode())
    assert 'alarm="a7"' not in _served(_view(alarms=rows[:7]))


def test_alarm_rows_are_made_again_only_for_changed_states():
    """The monitor's rows: the same object while an alarm's state stands still (or changes
    only in what the metrics do not show), a new row when a flag changes."""
    from dataclasses import replace

    from edge.alarms.state import AlarmState
    from edge.service.view import _AlarmRows

    states = {n: AlarmState(n, "high") for n in ("b", "a", "c")}
    made = _AlarmRows()
    first = made.of(states)
    assert [r.name for r in first] == ["a", "b", "c"]
    states["b"] = replace(states["b"], value=3.5)  # a new state, the same row
    states["c"] = replace(states["c"], active=True, unacknowledged=True)
    second = made.of(states)
    assert second[0] is first[0] and second[1] is first[1]
    assert second[2] is not first[2] and second[2].active and second[2].state == "unacknowledged"


def test_big_families_written_in_pieces_read_as_one_text():
    """A family past the flush size goes out as its own bytes; the text is the same."""
    from edge.web.metrics import Family

    big = Family("steamedge_z", "gauge", "z.", ("point",))
    for i in range(2500):
        big.add((f"p{i}",), i + 0.5)
    small = Family("steamedge_w", "counter", "w.", ("point",))
    small.add(("a",), 3)
    last = Family("steamedge_v", "gauge", "v.")
    last.add((), 1.0)
    text = render([small, big, last]).decode()
    assert text == (render([small]) + render([big]) + render([last])).decode()
    assert text.count("\n") == 2 * 3 + 2502 and 'steamedge_z{point="p2499"} 2499.5\n' in text
