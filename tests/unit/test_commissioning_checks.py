"""Commissioning checks of the config: a tag's stale_after must leave room for one poll."""

from __future__ import annotations

import pytest

from edge.config import parse_config
from edge.errors import ConfigError

CONFIG = """\
version: 1
site: fernhill-tannery
barometer: {fixed: 101.325 kPa}
sources:
  - name: plc
    protocol: modbus-tcp
    host: 127.0.0.1
    interval: 1 s
    timeout: 500 ms
    tags:
      - {name: drum_p, table: holding, address: 0, unit: bar, reference: gauge,
         stale_after: STALE}
"""


def test_stale_after_below_interval_plus_timeout_is_refused():
    """stale_after 1 s on a 1 s / 500 ms source would flip good/stale every poll: refused,
    with the least value that works."""
    with pytest.raises(ConfigError) as info:
        parse_config(CONFIG.replace("STALE", "1 s"), "c.yaml")
    (problem,) = [str(p) for p in info.value.problems]
    assert problem.startswith("c.yaml:12: sources[0].tags[0].stale_after: 1 s is shorter")
    assert "(1 s + 0.5 s = 1.5 s)" in problem and "give at least 1.5 s" in problem


def test_stale_after_of_interval_plus_timeout_passes():
    """stale_after equal to interval + timeout is accepted."""
    config = parse_config(CONFIG.replace("STALE", "1.5 s"), "c.yaml")
    assert config.sources[0].tags[0].stale_after == 1.5
