"""steam-edge alarms: the operator CLI over the HTTP API of a running monitor."""

from __future__ import annotations

import asyncio

import pytest
import pytest_asyncio

from edge.cli import main
from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    TOKEN,
    auth,
    post,
    registers,
    running_monitor,
    wait_for,
    write_config,
)

pytestmark = pytest.mark.asyncio

ALARM = "drum-superheat-low"


@pytest_asyncio.fixture
async def monitor(tmp_path, monkeypatch, token_env):
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.alarm_states[ALARM].state == "unacknowledged")
            yield m


async def _cli(*argv: str) -> int:
    return await asyncio.to_thread(main, list(argv))


async def test_list_shows_standing_alarm(monitor, capsys):
    """list prints the standing alarm with its priority and state."""
    assert await _cli("alarms", "--url", monitor.url, "list") == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if x.startswith(ALARM))
    assert "critical" in line and "unacknowledged" in line


async def test_ack_with_token_from_standard_variable(monitor, monkeypatch, capsys):
    """ack with STEAMEDGE_API_TOKEN set acknowledges the alarm as the given user."""
    monkeypatch.setenv("STEAMEDGE_API_TOKEN", TOKEN)
    code = await _cli("alarms", "--url", monitor.url, "ack", ALARM, "--user", "ops-ben")
    assert code == 0
    assert "acknowledged" in capsys.readouterr().out
    assert monitor.alarm_states[ALARM].state == "acknowledged"
    assert monitor.events(0, 1000)[-1].user == "ops-ben"


async def test_shelve_with_token_file(monitor, tmp_path, capsys):
    """shelve reads the token from --token-file and shelves for the given duration."""
    token_file = tmp_path / "token"
    token_file.write_text(TOKEN + "\n")
    code = await _cli(
        "alarms", "--url", monitor.url, "--token-file", str(token_file),
        "shelve", ALARM, "--duration", "15 min", "--reason", "burner service",
    )  # fmt: skip
    assert code == 0
    assert monitor.alarm_states[ALARM].state == "shelved"
    code = await _cli(
        "alarms", "--url", monitor.url, "--token-file", str(token_file), "unshelve", ALARM
    )
    assert code == 0 and not monitor.alarm_states[ALARM].shelved


async def test_out_of_service_with_token_env_name(monitor, capsys):
    """out-of-service reads the token from the variable named by --token-env."""
    code = await _cli(
        "alarms", "--url", monitor.url, "--token-env", "STEAMEDGE_TEST_TOKEN",
        "out-of-service", ALARM, "--reason", "transmitter replaced",
    )  # fmt: skip
    assert code == 0
    assert monitor.alarm_states[ALARM].state == "out_of_service"


async def test_ack_without_token_fails_readably(monitor, capsys):
    """Without a token the CLI exits 1 with one line naming 401 and how to give a token."""
    assert await _cli("alarms", "--url", monitor.url, "ack", ALARM) == 1
    err = capsys.readouterr().err
    assert "401" in err and "--token-file" in err and "Traceback" not in err
    assert monitor.alarm_states[ALARM].unacknowledged


async def test_unreachable_monitor_is_one_line(capsys):
    """A monitor that does not answer gives one readable error line, exit 1."""
    assert await _cli("alarms", "--url", "http://127.0.0.1:9", "list") == 1
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("error: cannot reach the monitor")


async def test_list_all_shows_rendered_messages(monitor, capsys):
    """list --all shows every alarm with its message as an operator reads it."""
    assert await _cli("alarms", "--url", monitor.url, "list", "--all") == 0
    out = capsys.readouterr().out
    line = next(x for x in out.splitlines() if x.startswith("drum-quality"))
    assert line.endswith("Point drum data quality: good")
    assert "{" not in out


async def test_token_file_with_a_trailing_space_works_for_the_api_and_the_cli(tmp_path, capsys):
    """A token file "s3cret \\n" means the token s3cret: Bearer s3cret is let in, and the
    alarms CLI reading the same file acknowledges (one secret rule for both)."""
    token_file = tmp_path / "api-token"
    token_file.write_bytes(b"s3cret \n")
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port, token_file=token_file)
        async with running_monitor(config) as m:
            await wait_for(lambda: m.alarm_states[ALARM].state == "unacknowledged")
            body = {"user": "ops-ana", "reason": "burner service"}
            status, _ = await post(f"{m.url}/api/v1/alarms/{ALARM}/shelve", body, auth("s3cret"))
            assert status == 200
            assert m.alarm_states[ALARM].state == "shelved"
            code = await _cli(
                "alarms", "--url", m.url, "--token-file", str(token_file), "unshelve", ALARM
            )
            assert code == 0
            assert not m.alarm_states[ALARM].shelved


async def test_options_after_the_action_and_one_word_per_change(monitor, monkeypatch, capsys):
    """`alarms ack NAME --url ...` works (options after the action) and says the change
    once: 'drum-superheat-low: acknowledged', not 'acknowledged (acknowledged)'."""
    monkeypatch.setenv("STEAMEDGE_API_TOKEN", TOKEN)
    assert await _cli("alarms", "ack", ALARM, "--url", monitor.url, "--user", "ops-ann") == 0
    said = [x for x in capsys.readouterr().out.splitlines() if x.startswith(ALARM)]
    assert said == [f"{ALARM}: acknowledged"]  # the monitor's own log lines are not it
    assert await _cli("alarms", "list", "--url", monitor.url) == 0
    line = next(x for x in capsys.readouterr().out.splitlines() if x.startswith(ALARM))
    assert "acknowledged" in line and "Superheat at the drum outlet is low" in line


async def test_ack_all_and_ack_priority(monitor, monkeypatch, capsys):
    """`ack --priority critical` acknowledges the critical alarm; `ack --all` then finds
    nothing left to acknowledge."""
    monkeypatch.setenv("STEAMEDGE_API_TOKEN", TOKEN)
    assert await _cli("alarms", "ack", "--priority", "critical", "--url", monitor.url) == 0
    assert f"{ALARM}: acknowledged" in capsys.readouterr().out
    assert not monitor.alarm_states[ALARM].unacknowledged
    assert await _cli("alarms", "ack", "--all", "--url", monitor.url) == 0
    assert "no alarm to acknowledge" in capsys.readouterr().out


async def test_events_since_a_span_in_local_time_and_as_json(monitor, capsys):
    """`alarms events --since '1 h'` lists the raise with a local time; --json gives the
    API's rows with RFC 3339 UTC times."""
    assert await _cli("alarms", "events", "--since", "1 h", "--url", monitor.url) == 0
    lines = capsys.readouterr().out.splitlines()
    assert lines[0].split() == ["TIME", "ALARM", "EVENT", "STATE", "BY", "MESSAGE"]
    raised = next(x for x in lines if ALARM in x and " raised " in x)
    assert raised[:4].isdigit() and raised[10] == " "  # YYYY-MM-DD HH:MM:SS, local
    assert await _cli("alarms", "events", "--json", "--alarm", ALARM, "--url", monitor.url) == 0
    rows = __import__("json").loads(capsys.readouterr().out)
    assert rows and all(r["alarm"] == ALARM and r["time"].endswith("Z") for r in rows)
