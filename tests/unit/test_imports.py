"""What a running monitor imports: only what its configuration needs."""

from __future__ import annotations

import json
import subprocess
import sys
import textwrap

import pytest

# the modules `steam-edge run` loads for a Modbus-only site, up to its first evaluation
_PROBE = textwrap.dedent(
    """
    import json, sys
    import edge.cli, edge.commands.run, edge.service, edge.sources.modbus, edge.web.app
    from edge import steam
    steam.properties(1.1e6, 520.0)  # region 2: a superheated header
    steam.saturated(1.0e6)  # regions 1 and 2 on the line
    loaded = {m.partition(".")[0] for m in sys.modules}
    print(json.dumps(sorted(loaded)))
    """
)


def _loaded(code: str) -> set[str]:
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True
    )
    return set(json.loads(out.stdout))


@pytest.fixture(scope="module")
def loaded() -> set[str]:
    return _loaded(_PROBE)


@pytest.mark.parametrize("heavy", ["asyncua", "aiomqtt", "iapws", "numpy", "scipy", "rich"])
def test_a_modbus_daemon_does_not_load(loaded, heavy):
    """The daemon of a Modbus-only site in regions 1/2 never imports this library."""
    assert heavy not in loaded


def test_region3_loads_iapws_when_asked():
    """A near-critical state still gets its properties (iapws imported on first need)."""
    code = (
        "import json, sys\nfrom edge import steam\n"
        "r = steam.properties(25e6, 650.0)\n"
        "print(json.dumps([r.region, 'iapws' in sys.modules]))"
    )
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=120, check=True
    )
    assert json.loads(out.stdout) == [3, True]
