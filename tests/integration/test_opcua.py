"""OPC UA source against a real asyncua server on 127.0.0.1: values, status codes,
timestamps, non-numeric values and unknown nodes, in subscribe and poll mode."""

from __future__ import annotations

import asyncio
import datetime as dt
import math
from typing import Any

import pytest
import pytest_asyncio

from edge import config as cfg
from edge.cli import main as cli
from edge.evaluation import stale_limits
from edge.sources import build_source
from edge.sources.opcua import OpcUaSource
from edge.store import TagStore
from tests.integration.opcua_server import PlantServer, free_port, running

pytestmark = pytest.mark.asyncio(loop_scope="module")

BAR = 1e5  # Pa; common practice
ZERO_C = 273.15  # K; common practice


@pytest_asyncio.fixture(scope="module", loop_scope="module")
async def server():
    srv = PlantServer()
    await srv.start()
    yield srv
    await srv.stop()


def source(url: str, tags: list[dict[str, Any]], **extra: Any) -> OpcUaSource:
    config = cfg.OpcUaSource.model_validate(
        {
            "name": "turbine-opcua",
            "protocol": "opcua",
            "endpoint": url,
            "interval": "200 ms",
            "backoff_max": "1 s",
            "tags": tags,
            **extra,
        }
    )
    src = build_source(config)
    assert isinstance(src, OpcUaSource)
    return src


def drum_p(server: PlantServer) -> dict[str, Any]:
    return {
        "name": "drum_p",
        "node": server.node_id("Boiler.DrumPressure"),
        "unit": "bar",
        "reference": "gauge",
    }


async def test_good_value_arrives_in_si_with_its_source_timestamp(server):
    """A Good Double in bar arrives in Pa, quality good, source timestamp kept."""
    stamp = dt.datetime(2026, 3, 1, 6, 30, 15, 250000, tzinfo=dt.UTC)
    await server.write("Boiler.DrumPressure", 8.25, source_time=stamp)
    async with running(source(server.url, [drum_p(server)])) as rec:
        s = await rec.wait_for(lambda s: s.tag == "drum_p", since=0)
    assert s.quality.good
    assert s.value == pytest.approx(8.25 * BAR)
    assert s.source_time == pytest.approx(stamp.timestamp(), abs=1e-6)
    assert s.receive_time > s.source_time


async def test_uncertain_status_keeps_the_value_and_names_the_code(server):
    """An Uncertain status keeps the number, quality uncertain, the code's name as reason."""
    await server.write("Boiler.DrumPressure", 7.0)
    async with running(source(server.url, [drum_p(server)])) as rec:
        await rec.wait_for(lambda s: s.quality.good, since=0)
        await server.write("Boiler.DrumPressure", 7.5, status="UncertainLastUsableValue")
        s = await rec.wait_for(lambda s: s.quality.name == "uncertain")
    assert s.quality.reason == "UncertainLastUsableValue"
    assert s.value == pytest.approx(7.5 * BAR)
    assert s.usable


async def test_bad_status_is_never_a_number_and_keeps_last_good(server):
    """A Bad status gives NaN, quality bad with the code's name, the last good as context."""
    await server.write("Boiler.DrumPressure", 6.0)
    async with running(source(server.url, [drum_p(server)])) as rec:
        await rec.wait_for(lambda s: s.quality.good, since=0)
        await server.write("Boiler.DrumPressure", 9.9, status="BadSensorFailure")
        s = await rec.wait_for(lambda s: s.quality.name == "bad")
    assert s.quality.reason == "BadSensorFailure"
    assert math.isnan(s.value)
    assert s.last_good == pytest.approx(6.0 * BAR)
    assert not s.usable


@pytest.mark.parametrize("node", ["Boiler.Label", "Boiler.Running", "Boiler.Levels"])
async def test_non_numeric_value_is_bad_not_a_number(server, node):
    """A String, a Boolean or an array is quality bad, reason not_a_number."""
    tag = {"name": "odd", "node": server.node_id(node), "unit": "degC"}
    async with running(source(server.url, [tag])) as rec:
        s = await rec.wait_for(lambda s: s.tag == "odd", since=0)
    assert s.quality.name == "bad"
    assert s.quality.reason == "not_a_number"
    assert math.isnan(s.value)


async def test_unknown_node_is_bad_and_the_others_still_flow(server):
    """A NodeId the server does not know is bad/BadNodeIdUnknown; other tags are fine."""
    await server.write("Boiler.DrumPressure", 7.0)
    ghost = {
        "name": "ghost",
        "node": f"ns={server.ns};s=Boiler.NoSuchThing",
        "unit": "bar",
        "reference": "gauge",
    }
    async with running(source(server.url, [ghost, drum_p(server)])) as rec:
        g = await rec.wait_for(lambda s: s.tag == "ghost", since=0)
        p = await rec.wait_for(lambda s: s.tag == "drum_p", since=0)
    assert (g.quality.name, g.quality.reason) == ("bad", "BadNodeIdUnknown")
    assert p.quality.good


async def test_malformed_node_id_is_bad_config(server):
    """A node string that is no NodeId is bad/config, and the source keeps running."""
    tag = {
        "name": "typo",
        "node": "ns=2;q=Boiler.DrumPressure",
        "unit": "bar",
        "reference": "gauge",
    }
    async with running(source(server.url, [tag, drum_p(server)])) as rec:
        s = await rec.wait_for(lambda s: s.tag == "typo", since=0)
        await rec.wait_for(lambda s: s.tag == "drum_p" and s.quality.good, since=0)
    assert (s.quality.name, s.quality.reason) == ("bad", "config")


async def test_scaled_integer_goes_through_conditioning(server):
    """An Int32 count is scaled (0..4000 -> 0..400 degC) and converted to kelvin."""
    await server.write("Boiler.FeedFlowCount", 1234, variant_type=None)
    tag = {
        "name": "raw_t",
        "node": server.node_id("Boiler.FeedFlowCount"),
        "unit": "degC",
        "scale": [0, 4000, 0, 400],
    }
    async with running(source(server.url, [tag])) as rec:
        s = await rec.wait_for(lambda s: s.tag == "raw_t", since=0)
    assert s.value == pytest.approx(123.4 + ZERO_C)


async def test_unchanged_value_is_emitted_again_every_interval(server):
    """With no change, the tag is re-emitted each interval: new receive time, same source time."""
    await server.write("Boiler.DrumTemperature", 181.0)
    tag = {"name": "drum_t", "node": server.node_id("Boiler.DrumTemperature"), "unit": "degC"}
    async with running(source(server.url, [tag])) as rec:
        first = await rec.wait_for(lambda s: s.tag == "drum_t", since=0)
        later = await rec.wait_for(lambda s: s.receive_time > first.receive_time + 0.3)
    assert later.source_time == first.source_time
    assert later.value == pytest.approx(181.0 + ZERO_C)
    assert later.quality.good


async def test_poll_mode_reads_values_and_status_codes(server):
    """mode: poll reads every node each interval, with the same status mapping."""
    await server.write("Boiler.DrumPressure", 5.0)
    src = source(server.url, [drum_p(server)], mode="poll")
    async with running(src) as rec:
        s = await rec.wait_for(lambda s: s.quality.good, since=0)
        await server.write("Boiler.DrumPressure", 5.0, status="BadCommunicationError")
        b = await rec.wait_for(lambda s: s.quality.name == "bad")
        assert src.health.up
    assert s.value == pytest.approx(5.0 * BAR)
    assert b.quality.reason == "BadCommunicationError"
    assert src.health.reads >= 1


async def test_tag_goes_stale_three_intervals_after_samples_stop(server):
    """Samples that stop arriving (the source itself stopped) make the tag bad/stale after
    its default stale_after (3 intervals, at least interval + timeout: here 0.2 + 1 s),
    with its last good value as context."""
    await server.write("Boiler.DrumPressure", 6.5)
    src = source(server.url, [drum_p(server)])
    full = cfg.Config.model_validate(
        {
            "version": 1,
            "site": "riverside-laundry",
            "barometer": {"fixed": "101.325 kPa"},
            "sources": [src.config.model_dump(mode="json")],
        }
    )
    limits = stale_limits(full)
    assert limits["drum_p"] == pytest.approx(1.2)
    store = TagStore(limits)
    async with running(src) as rec:
        await rec.wait_for(lambda s: s.quality.good, since=0)
    store.update(rec.samples)
    last = store.get("drum_p")
    assert last is not None and last.quality.good
    assert store.snapshot(last.receive_time + 1.19)["drum_p"].quality.good
    stale = store.snapshot(last.receive_time + 1.21)["drum_p"]
    assert (stale.quality.name, stale.quality.reason) == ("bad", "stale")
    assert stale.last_good == pytest.approx(6.5 * BAR)


async def test_no_server_gives_comm_loss_every_interval_without_raising():
    """Nobody listening: every tag bad/comm_loss each interval, refusals counted, no raise."""
    url = f"opc.tcp://127.0.0.1:{free_port()}/nobody"
    src = source(url, [{"name": "drum_t", "node": "ns=2;s=X", "unit": "degC"}])
    async with running(src) as rec:
        a = await rec.wait_for(lambda s: s.quality.reason == "comm_loss", since=0)
        b = await rec.wait_for(lambda s: s.receive_time > a.receive_time, timeout=2)
    assert b.quality.reason == "comm_loss"
    assert src.health.errors.get("refused", 0) >= 1
    assert not src.health.up


# --- steam-edge probe (run in a thread: it has its own event loop, the server runs in ours)


async def probe(*argv: str) -> int:
    return await asyncio.to_thread(cli, ["probe", *argv])


async def test_probe_prints_value_type_status_and_both_timestamps(server, capsys):
    """probe --node prints value, type, status code, source and server timestamps."""
    stamp = dt.datetime(2026, 3, 1, 6, 30, 15, 250000, tzinfo=dt.UTC)
    await server.write("Boiler.DrumTemperature", 182.5, source_time=stamp)
    rc = await probe(server.url, "--node", server.node_id("Boiler.DrumTemperature"))
    out = capsys.readouterr().out
    assert rc == 0
    assert "value         182.5" in out
    assert "type          Double" in out
    assert "status        Good (0x00000000)" in out
    assert "source time   2026-03-01T06:30:15.250000Z" in out
    assert "server time   20" in out


async def test_probe_of_an_unknown_node_shows_the_status_and_fails(server, capsys):
    """An unknown NodeId is shown with BadNodeIdUnknown and the probe exits 1."""
    rc = await probe(server.url, "--node", f"ns={server.ns};s=Boiler.NoSuchThing")
    assert rc == 1
    assert "BadNodeIdUnknown (0x80340000)" in capsys.readouterr().out


async def test_probe_browse_lists_variables_with_their_node_ids(server, capsys):
    """probe --browse --depth 2 lists the plant's variables with NodeId, value and type."""
    await server.write("Boiler.DrumPressure", 7.5)
    rc = await probe(server.url, "--browse", "--depth", "2")
    lines = capsys.readouterr().out.splitlines()
    assert rc == 0
    line = next(x for x in lines if server.node_id("Boiler.DrumPressure") in x)
    assert "variable" in line and "= 7.5 (Double, Good)" in line
    assert any(server.node_id("Boiler.Label") in x and "(String, Good)" in x for x in lines)


async def test_probe_browse_of_a_node_that_does_not_exist_says_so_and_exits_1(server, capsys):
    """--browse --node of an unknown NodeId says the server has no such node (not an
    empty listing) and exits 1."""
    rc = await probe(server.url, "--browse", "--node", "ns=2;s=No.Such.Node")
    out = capsys.readouterr().out
    assert rc == 1
    assert "ns=2;s=No.Such.Node: no such node on this server (BadNodeIdUnknown)" in out


async def test_probe_with_nobody_listening_is_a_one_line_error(capsys):
    """A refused connection is one readable line on stderr and exit code 1."""
    rc = await probe(f"opc.tcp://127.0.0.1:{free_port()}/nobody", "--node", "ns=2;s=X")
    err = capsys.readouterr().err
    assert rc == 1
    assert err.strip() == "error: probe: connection refused"
