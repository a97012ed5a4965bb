"""``steam-edge history`` over a real history file written beside a config's state file."""

from __future__ import annotations

import csv
import io
import json
import time

import pytest

from edge.cli import main
from edge.history import Frame, HistoryStore, Layout, default_ladder, rfc3339
from edge.model import GOOD, PointState, Reading, Sample, bad

CONFIG = """\
version: 1
site: test-site
barometer: {{fixed: 101.325 kPa}}
sources:
  - {{name: plc, protocol: modbus-tcp, host: 127.0.0.1, port: 5020,
     tags: [{{name: drum_p, table: holding, address: 0, type: float32, unit: bar,
              reference: gauge}},
            {{name: drum_t, table: holding, address: 2, type: float32, unit: degC}}]}}
points:
  - {{name: drum, pressure: drum_p, temperature: drum_t, state: saturated}}
storage:
  path: {state}
"""


@pytest.fixture
def config(tmp_path):
    """A config and 20 s of history ending now: drum at 10 bar(a), 180 degC; two bad passes."""
    path = tmp_path / "edge.yaml"
    path.write_text(CONFIG.format(state=tmp_path / "state.sqlite"))
    store = HistoryStore.open(str(tmp_path / "state.history.sqlite"), default_ladder())
    layout = Layout.of(["drum"], ["drum_p", "drum_t"])
    start = time.time() - 20
    for i in range(20):
        q = bad("comm_loss") if i in (5, 6) else GOOD
        readings = {
            "pressure": Reading(1.0e6, q, "Pa"),
            "temperature": Reading(453.15, q, "K"),
            "tsat": Reading(453.03, q, "K"),
            "superheat": Reading(0.12, q, "K"),
        }
        point = PointState("drum", "saturated", readings, q)
        tags = {"drum_p": Sample("drum_p", 898_675.0, q, start + i, start + i)}
        store.write([Frame.capture(start + i, layout, {"drum": point}, tags)])
    store.close()
    return path, start


def test_csv_has_every_pass_with_display_values_and_quality(config, capsys):
    """--csv: one row per pass, 10 bar(a) shown for 1 MPa, the two bad passes empty."""
    path, start = config
    code = main(["history", "-c", str(path), "--point", "drum", "--quantity", "pressure",
                 "--since", rfc3339(start - 1), "--csv"])  # fmt: skip
    assert code == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert len(rows) == 20
    assert rows[0]["display"] == "10.0" and rows[0]["display_unit"] == "bar(a)"
    assert [r["quality"] for r in rows[4:8]] == ["good", "bad", "bad", "good"]
    assert rows[5]["value"] == ""


def test_a_tag_reads_in_its_own_reference(config, capsys):
    """--tag drum_p --json: the raw gauge value, shown in barg."""
    path, _ = config
    assert main(["history", "-c", str(path), "--tag", "drum_p", "--since", "1m", "--json"]) == 0
    s = json.loads(capsys.readouterr().out)["series"][0]
    assert (s["name"], s["display_unit"]) == ("drum_p", "barg")
    assert s["samples"][0]["display"] == pytest.approx(8.98675)


def test_the_table_has_a_column_per_series(config, capsys):
    """Without --csv/--json: a header naming each series and unit, a line per pass."""
    path, _ = config
    assert main(["history", "-c", str(path), "--point", "drum", "--since=-1m"]) == 0
    lines = capsys.readouterr().out.splitlines()
    assert "drum.pressure [bar(a)]" in lines[1] and "drum.tsat [degC]" in lines[1]
    assert len(lines) == 22 and "(bad)" in lines[7]


def test_an_unknown_point_is_one_line_and_exit_1(config, capsys):
    """A point not in the config: 'error: no point or tag named ...' and exit code 1."""
    path, _ = config
    assert main(["history", "-c", str(path), "--point", "boiler"]) == 1
    assert capsys.readouterr().err.strip() == "error: no point or tag named 'boiler'"
