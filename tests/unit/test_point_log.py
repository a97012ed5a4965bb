"""The service's log of point changes: one JSON line per change, with the point's name."""

from __future__ import annotations

import io
import json

import pytest
import structlog

from edge import logs
from edge.model import GOOD, PointState, bad, uncertain
from edge.service.point_log import PointLog


@pytest.fixture
def out():
    stream = io.StringIO()
    logs.configure("json", stream=stream)
    yield stream
    structlog.reset_defaults()


def lines(stream: io.StringIO) -> list[dict]:
    return [json.loads(x) for x in stream.getvalue().splitlines()]


def state(quality=GOOD, hint: str | None = None, name: str = "drum") -> PointState:
    return PointState(name=name, state="saturated", readings={}, quality=quality, hint=hint)


def test_start_up_is_quiet(out):
    """Waiting for data, then good data, logs nothing (500 points must not flood the log)."""
    log = PointLog()
    log.observe({"drum": state(bad("no_data"))})
    log.observe({"drum": state(uncertain("barometer_no_data"))})
    log.observe({"drum": state()})
    log.observe({"drum": state()})
    assert out.getvalue() == ""


def test_a_point_going_bad_and_back_is_two_lines(out):
    """good -> bad(sensor_fault) is a warning naming the point; back to good is info."""
    log = PointLog()
    log.observe({"drum": state()})
    log.observe({"drum": state(bad("sensor_fault"))})
    log.observe({"drum": state(bad("sensor_fault"))})
    log.observe({"drum": state()})
    first, second = lines(out)
    assert first["event"] == "point_changed" and first["point"] == "drum"
    assert (first["level"], first["quality"], first["reason"], first["was"]) == (
        "warning",
        "bad",
        "sensor_fault",
        "good",
    )
    assert (second["level"], second["quality"], second["was"]) == (
        "info",
        "good",
        "bad(sensor_fault)",
    )


def test_first_data_bad_is_news(out):
    """A point whose first data is bad says so once the waiting is over."""
    log = PointLog()
    log.observe({"drum": state(bad("no_data"))})
    log.observe({"drum": state(bad("comm_loss"))})
    (row,) = lines(out)
    assert (row["level"], row["reason"], row["was"]) == ("warning", "comm_loss", "bad(no_data)")


def test_a_hint_appearing_is_a_warning_with_its_text(out):
    """A commissioning hint that appears is logged with the point and the hint."""
    log = PointLog()
    log.observe({"drum_b": state(name="drum_b")})
    log.observe({"drum_b": state(hint="drum_p_b reads like gauge: set reference: gauge")})
    (row,) = lines(out)
    assert row["point"] == "drum_b" and row["level"] == "warning"
    assert row["hint"] == "drum_p_b reads like gauge: set reference: gauge"


def test_points_dropped_by_a_reload_are_forgotten(out):
    """After keep(), a point that comes back is new again: its good start is quiet."""
    log = PointLog()
    log.observe({"drum": state(bad("sensor_fault"))})
    log.keep(set())
    log.observe({"drum": state()})
    assert [r["reason"] for r in lines(out)] == ["sensor_fault"]


def test_a_link_drop_over_5000_points_is_a_few_lines(out):
    """5,000 points going bad at once: the first LINES_PER_PASS by name, one line that
    counts the rest; back to good the same way."""
    from edge.service.point_log import LINES_PER_PASS

    names = [f"pt{i:04d}" for i in range(5000)]
    log = PointLog()
    log.observe({n: state(name=n) for n in names})
    log.observe({n: state(bad("comm_loss"), name=n) for n in names})
    log.observe({n: state(bad("comm_loss"), name=n) for n in names})  # no change: no line
    got = lines(out)
    assert len(got) == LINES_PER_PASS + 1
    assert [x["point"] for x in got[:-1]] == names[:LINES_PER_PASS]
    summary = got[-1]
    assert summary["event"] == "point_changes" and summary["level"] == "warning"
    assert summary["points"] == 5000 - LINES_PER_PASS
    assert summary["by_quality"] == {"bad(comm_loss)": 5000 - LINES_PER_PASS}


def test_a_new_quality_object_with_the_same_value_is_no_news(out):
    """Equal qualities made afresh each pass (an uncertain reason) log nothing twice."""
    log = PointLog()
    log.observe({"drum": state()})
    log.observe({"drum": state(uncertain("near_saturation"))})
    log.observe({"drum": state(uncertain("near_saturation"))})
    assert len(lines(out)) == 1
