"""One set of barometer bands for check, run and calc (edge.config.rules): a high site
works with no settings, and a value that cannot be a barometer is refused by all three
with the same words."""

from __future__ import annotations

from pathlib import Path

import pytest

from edge.cli import main
from edge.errors import ConfigError
from edge.service import Monitor
from tests.integration.opcua_server import free_port

pytestmark = pytest.mark.asyncio

CONFIG = """\
version: 1
site: high-valley-dairy
barometer:
  {barometer}
sources:
  - name: boiler-plc
    protocol: modbus-tcp
    host: 127.0.0.1
    port: {port}
    tags:
      - {{name: drum_p, table: holding, address: 0, type: float32, unit: bar,
         reference: gauge}}
points: []
http:
  listen: 127.0.0.1:0
storage:
  path: {state}
"""


def _config(tmp_path: Path, barometer: str) -> Path:
    path = tmp_path / "edge.yaml"
    state = tmp_path / "state.sqlite"
    path.write_text(CONFIG.format(barometer=barometer, port=free_port(), state=state))
    return path


async def test_site_at_2600_m_passes_check_and_run(tmp_path, capsys):
    """altitude: 2600 m alone passes check and starts run, at the standard atmosphere
    there, 73.75 kPa (ICAO standard atmosphere, ISO 2533, troposphere formula)."""
    config = _config(tmp_path, "altitude: 2600 m")
    assert main(["check", "-c", str(config)]) == 0
    assert "error" not in capsys.readouterr().err
    monitor = Monitor(str(config), http=False)
    await monitor.start()
    try:
        assert monitor.barometer is not None
        assert monitor.barometer.value == pytest.approx(73_749.0, abs=5.0)
        assert monitor.barometer.quality.good
    finally:
        await monitor.stop()


@pytest.mark.parametrize(
    ("barometer", "calc_args", "words"),
    [
        (  # hPa typed as kPa
            "fixed: 1013 kPa",
            ["--baro", "1013", "kPa"],
            "1013 kPa is no barometric pressure (about 101 kPa at sea level, 54 kPa at "
            "5000 m; 28 .. 117 kPa accepted); check the unit",
        ),
        (
            "fixed: 10 kPa",
            ["--baro", "10", "kPa"],
            "10 kPa is no barometric pressure (about 101 kPa at sea level, 54 kPa at "
            "5000 m; 28 .. 117 kPa accepted); check the unit",
        ),
        ("altitude: 9000 m", ["--altitude", "9000", "m"], "9000 m is outside -500 m .. 8000 m"),
    ],
)
async def test_check_run_and_calc_refuse_the_same_barometer_alike(
    tmp_path, capsys, barometer, calc_args, words
):
    """The same impossible barometer: check exits 2, run refuses to start, calc and flow
    exit 2, all four with the same message."""
    config = _config(tmp_path, barometer)
    assert main(["check", "-c", str(config)]) == 2
    check_err = capsys.readouterr().err
    with pytest.raises(ConfigError) as refused:
        await Monitor(str(config), http=False).start()
    assert main(["calc", "7", "barg", *calc_args]) == 2
    calc_err = capsys.readouterr().err
    flow = ["flow", "orifice", "--pipe", "102.26", "mm", "--bore", "60", "mm", "--taps"]
    flow += ["flange", "--dp", "25", "kPa", "--pressure", "10", "barg", "--temperature"]
    assert main([*flow, "200", "degC", *calc_args]) == 2
    flow_err = capsys.readouterr().err
    assert words in flow_err
    assert words in check_err
    assert [p.message for p in refused.value.problems] == [words]
    assert words in calc_err
