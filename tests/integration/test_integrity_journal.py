"""The journal under hostile input and a hostile file system (issue 10, items 1 and 6):
operator text is checked before it touches state, a row that can never be written is
quarantined instead of blocking every later commit, and a journal file deleted, replaced
or stripped of its WAL under the running monitor is noticed. Real SQLite files; the
service tests run a real ``steam-edge run`` against a real Modbus server."""

from __future__ import annotations

import asyncio
import json
import os
import sqlite3
import subprocess
from pathlib import Path

import pytest

from edge.alarms.journal import Journal
from edge.errors import StorageError
from edge.model import AlarmEvent
from tests.integration.modbus_server import modbus_server
from tests.integration.servicekit import (
    EXE,
    TOKEN,
    ServiceProcess,
    auth,
    get_json,
    metric,
    metrics_text,
    registers,
    wait_for,
    write_config,
)

ALARM = "drum-superheat-low"
BAD = [b"--comment", b"bad \xff byte"]  # not UTF-8: Python sees a lone surrogate


def event(i: int, **kw: object) -> AlarmEvent:
    fields = {"alarm": "drum-p-high", "kind": "raised", "time": float(i), "priority": "high"}
    return AlarmEvent(**{**fields, **kw})  # type: ignore[arg-type]


def test_a_lone_surrogate_is_stored_escaped_and_later_commits_work(tmp_path: Path):
    """An event whose comment holds a lone surrogate is stored with it escaped as text
    (\\ud83d) and the next commit is written as usual: nothing waits in the backlog."""
    j = Journal.open(str(tmp_path / "j.sqlite"), site="s")
    try:
        stored = j.commit([event(1, kind="acknowledged", user="op", comment="ok \ud83d")])
        assert stored[0].comment == "ok \\ud83d"
        j.commit([event(2)])
        assert j.backlog == 0
        assert [e.comment for e in j.events(0)] == ["ok \\ud83d", None]
    finally:
        j.close()


def test_an_event_that_cannot_be_written_is_quarantined_and_the_rest_stored(tmp_path: Path):
    """A row SQLite refuses for its data (a value of a type it cannot bind) goes to the
    quarantine table and is counted; the other events of the batch and later ones are
    stored, and the journal's backlog is empty."""
    path = tmp_path / "j.sqlite"
    j = Journal.open(str(path), site="s")
    try:
        bad = event(2, alarm=object())  # type: ignore[arg-type]
        stored = j.commit([event(1), bad, event(3)])
        assert [e.time for e in stored] == [1.0, 3.0]
        assert j.quarantined == 1 and j.backlog == 0
        j.commit([event(4)])
        assert [e.time for e in j.events(0)] == [1.0, 3.0, 4.0]
    finally:
        j.close()
    with sqlite3.connect(path) as c:
        (reason, data) = c.execute("SELECT reason, data FROM quarantine").fetchone()
    assert "InterfaceError" in reason or "ProgrammingError" in reason
    assert "AlarmEvent(" in json.loads(data)["event"]


def test_a_journal_file_replaced_under_the_handle_fails_the_next_commit(tmp_path: Path):
    """Another file renamed over the journal's path: the next commit raises StorageError
    saying it was replaced, and the event waits in the backlog (never written to the
    orphaned file)."""
    path = tmp_path / "j.sqlite"
    j = Journal.open(str(path), site="s")
    try:
        other = tmp_path / "other.sqlite"
        other.write_bytes(path.read_bytes())
        os.replace(other, path)
        with pytest.raises(StorageError, match="replaced under the running monitor"):
            j.commit([event(1)])
        assert j.backlog == 1
    finally:
        with pytest.raises(StorageError):
            j.close()


def test_a_removed_wal_fails_the_check(tmp_path: Path):
    """The write-ahead log deleted under the open handle: ``check`` raises StorageError
    naming the WAL (events written from then on would vanish in a crash)."""
    path = tmp_path / "j.sqlite"
    j = Journal.open(str(path), site="s")
    try:
        j.commit([event(1)])
        os.unlink(str(path) + "-wal")
        with pytest.raises(StorageError, match=r"write-ahead log .* is gone"):
            j.check()
    finally:
        j.close()  # nothing waits in the backlog: closing is quiet


# --- a real `steam-edge run` -------------------------------------------------------------


async def _post_raw(url: str, body: bytes) -> tuple[int, dict]:
    import aiohttp

    headers = {**auth(), "Content-Type": "application/json"}
    async with aiohttp.ClientSession() as s, s.post(url, data=body, headers=headers) as r:
        return r.status, await r.json()


async def _standing_alarm(tmp_path: Path, plc_port: int) -> tuple[ServiceProcess, str]:
    config = write_config(tmp_path / "edge.yaml", plc_port)
    service = ServiceProcess(config)
    url = await asyncio.to_thread(lambda: service.url)

    async def raised() -> bool:
        status, body = await get_json(url + "/api/v1/alarms")
        return status == 200 and any(
            a["name"] == ALARM and a["state"] == "unacknowledged" for a in body["alarms"]
        )

    await wait_for(raised, timeout=20.0, step=0.2)
    return service, url


@pytest.mark.slow
@pytest.mark.asyncio
async def test_bad_operator_text_is_refused_before_it_changes_anything(tmp_path: Path):
    """Against a real ``steam-edge run``: an ack whose user is a lone surrogate, and one
    whose comment holds a control character, answer 400 and leave the alarm unacknowledged;
    a clean ack afterwards is journalled, /readyz stays 200, storage_ok 1, no traceback."""
    # 9 barg + 97 kPa -> Tsat about 179.5 degC: 180 degC is 0.5 K superheat, below 5 K
    async with modbus_server(holding=registers(drum_c=180.0)) as plc:
        service, url = await _standing_alarm(tmp_path, plc.port)
        try:
            ack = f"{url}/api/v1/alarms/{ALARM}/ack"
            status, body = await _post_raw(ack, b'{"user": "\\ud83d"}')
            assert status == 400 and body["error"] == "bad_text", body
            assert "lone surrogate" in body["detail"]
            status, body = await _post_raw(ack, b'{"user": "op", "comment": "a\\u001bb"}')
            assert status == 400 and "control character U+001B" in body["detail"]
            _, alarms = await get_json(url + "/api/v1/alarms")
            assert {a["name"]: a["state"] for a in alarms["alarms"]}[ALARM] == "unacknowledged"
            status, _ = await _post_raw(ack, b'{"user": "op", "comment": "seen"}')
            assert status == 200
            _, events = await get_json(url + "/api/v1/events")
            kinds = [(e["kind"], e["user"]) for e in events["events"] if e["alarm"] == ALARM]
            assert kinds == [("raised", None), ("acknowledged", "op")]
            assert (await get_json(url + "/readyz"))[0] == 200
            assert metric(await metrics_text(url), "steamedge_storage_ok") == 1
        finally:
            code = service.stop()
        assert code == 0
        assert not [line for line in service.lines + service.stderr if "Traceback" in line]


@pytest.mark.slow
@pytest.mark.asyncio
async def test_alarms_cli_refuses_a_non_utf8_comment_in_one_line(tmp_path: Path):
    """``steam-edge alarms ack --comment $'\\xff'``: exit 1, one error line naming the
    option, nothing sent (the monitor is not even asked: the URL points nowhere)."""
    run = await asyncio.to_thread(
        subprocess.run,
        [EXE.encode(), b"alarms", b"--url", b"http://127.0.0.1:9", b"ack", b"x", *BAD],
        capture_output=True,
        timeout=30,
        env={**os.environ, "STEAMEDGE_API_TOKEN": TOKEN},
    )
    err = run.stderr.decode("utf-8", "replace").strip().splitlines()
    assert run.returncode == 1 and len(err) == 1, err
    assert "'--reason' is not valid UTF-8 text" in err[0]


@pytest.mark.slow
@pytest.mark.asyncio
@pytest.mark.parametrize("victim", ["state.sqlite", "state.sqlite-wal"])
async def test_journal_file_or_wal_deleted_while_running_fails_loudly(tmp_path, victim):
    """Deleting the journal file (or its WAL) under a real ``steam-edge run`` turns
    /readyz 503 (storage), steamedge_storage_ok 0, and writes one storage_failed line."""
    async with modbus_server(holding=registers(drum_c=190.0)) as plc:
        config = write_config(tmp_path / "edge.yaml", plc.port)
        service = ServiceProcess(config)
        try:
            url = await asyncio.to_thread(lambda: service.url)
            await wait_for(lambda: _status(url, 200), timeout=20.0, step=0.2)
            os.unlink(tmp_path / victim)
            await wait_for(lambda: _status(url, 503), timeout=10.0, step=0.2)
            _, body = await get_json(url + "/readyz")
            assert body["checks"]["storage"] is False
            assert metric(await metrics_text(url), "steamedge_storage_ok") == 0
            failed = await asyncio.to_thread(service.wait_event, "storage_failed", 5.0)
            assert "gone under the running monitor" in failed["error"]
        finally:
            service.stop()
        assert [e["event"] for e in service.events()].count("storage_failed") == 1


async def _status(url: str, want: int) -> bool:
    return (await get_json(url + "/readyz"))[0] == want


@pytest.mark.slow
def test_a_saved_state_that_is_not_json_stops_start_up_with_one_line(tmp_path: Path):
    """A row of alarm_states that is not JSON: ``steam-edge run`` exits 1 with one error
    line naming the file and the alarm, no traceback."""
    config = write_config(tmp_path / "edge.yaml", 9)
    state = tmp_path / "state.sqlite"
    Journal.open(str(state), site="riverside-laundry").close()
    with sqlite3.connect(state) as c:
        c.execute("INSERT INTO alarm_states (name, data) VALUES (?, ?)", (ALARM, "{not json"))
    run = subprocess.run(
        [EXE, "run", "-c", str(config)],
        capture_output=True,
        text=True,
        timeout=60,
        env={**os.environ, "STEAMEDGE_TEST_TOKEN": TOKEN},
    )
    errors = [line for line in run.stderr.splitlines() if line.startswith("error: ")]
    assert run.returncode == 1, run.stderr
    assert len(errors) == 1 and str(state) in errors[0] and repr(ALARM) in errors[0]
    assert "Traceback" not in run.stderr + run.stdout
