"""Storage failures are reported plainly and never lose an event.

Tests run as root here, and root ignores file permissions, so read-only and full storage
are made real: a tmpfs mounted read-only or filled up, inside a private mount namespace
(``unshare --mount``; ``--map-root-user`` when not root) that vanishes with the child
process. The full-database case is also shown without mounts, with SQLite's
``max_page_count`` limit, and an unusable path with a parent that is a regular file.
"""

from __future__ import annotations

import json
import os
import shutil
import sqlite3
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from edge.alarms.engine import AlarmState
from edge.alarms.journal import Journal
from edge.errors import StorageError
from edge.model import AlarmEvent

pytestmark = pytest.mark.slow  # starts processes

REPO = Path(__file__).resolve().parents[2]


def event(i: int = 0, size: int = 10) -> AlarmEvent:
    return AlarmEvent(
        alarm="drum-p-high", kind="raised", time=float(i), priority="high", message="x" * size
    )


def in_mount_namespace(tmp_path: Path, body: str) -> dict:
    """Run ``body`` (Python, with ``mnt`` a fresh mount point, ``mount(*args)``) in a
    private mount namespace; return the dict it prints as JSON."""
    unshare = shutil.which("unshare")
    assert unshare, "unshare (util-linux) is needed for the read-only and full-disk tests"
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    script = tmp_path / "child.py"
    script.write_text(
        textwrap.dedent(
            """
            import json, subprocess, sys
            from edge.alarms.journal import Journal
            from edge.errors import StorageError
            from edge.model import AlarmEvent
            mnt = sys.argv[1]
            out = {}
            def mount(*args):
                subprocess.run(["mount", *args], check=True, capture_output=True)
            def event(i, size=4000):
                return AlarmEvent(alarm="a", kind="raised", time=float(i), priority="low",
                                  message="x" * size)
            """
        )
        + textwrap.dedent(body)
        + "\nprint(json.dumps(out))\n"
    )
    cmd = [unshare, "--mount", "--propagation", "private"]
    if os.geteuid() != 0:
        cmd.append("--map-root-user")
    run = subprocess.run(
        [*cmd, sys.executable, str(script), str(mnt)],
        capture_output=True,
        text=True,
        timeout=60,
        cwd=REPO,
    )
    assert run.returncode == 0, run.stderr
    return json.loads(run.stdout.strip().splitlines()[-1])


def test_parent_that_is_a_file_is_reported_at_open(tmp_path: Path):
    """A storage path under a regular file fails at open with the path and 'Not a directory'."""
    blocker = tmp_path / "blocker"
    blocker.write_text("not a folder")
    path = str(blocker / "state.sqlite")
    with pytest.raises(StorageError) as info:
        Journal.open(path, site="s")
    assert path in str(info.value) and "Not a directory" in str(info.value)
    assert info.value.reason == "Not a directory"  # type: ignore[attr-defined]


def test_read_only_file_system_is_reported_at_open(tmp_path: Path):
    """An existing journal on a file system remounted read-only fails at open, saying so."""
    out = in_mount_namespace(
        tmp_path,
        """
        mount("-t", "tmpfs", "-o", "size=1m", "tmpfs", mnt)
        Journal.open(mnt + "/state.sqlite", site="s").close()
        mount("-o", "remount,ro", mnt)
        try:
            Journal.open(mnt + "/state.sqlite", site="s")
        except StorageError as exc:
            out["error"] = str(exc)
        """,
    )
    path = str(tmp_path / "mnt" / "state.sqlite")
    assert out["error"] == f"alarm journal {path}: cannot open: Read-only file system"


def test_new_journal_on_read_only_file_system_is_reported(tmp_path: Path):
    """A journal to be created on a read-only file system fails at open, saying so."""
    out = in_mount_namespace(
        tmp_path,
        """
        mount("-t", "tmpfs", "-o", "size=1m,ro", "tmpfs", mnt)
        try:
            Journal.open(mnt + "/new.sqlite", site="s")
        except StorageError as exc:
            out["error"] = str(exc)
        """,
    )
    assert out["error"].endswith("new.sqlite: cannot open: Read-only file system")


def test_full_disk_is_reported_at_open(tmp_path: Path):
    """A journal created on a full file system fails at open with SQLite's 'disk is full'."""
    out = in_mount_namespace(
        tmp_path,
        """
        mount("-t", "tmpfs", "-o", "size=64k", "tmpfs", mnt)
        try:
            with open(mnt + "/filler", "wb") as f:
                while True:
                    f.write(b"\\0" * 4096)
                    f.flush()
        except OSError:
            pass
        try:
            Journal.open(mnt + "/state.sqlite", site="s")
        except StorageError as exc:
            out["error"] = str(exc)
        """,
    )
    assert "state.sqlite: cannot open: database or disk is full" in out["error"]


def test_full_disk_keeps_events_until_space_returns(tmp_path: Path):
    """On a full disk commit raises, the events wait, and all are written once there is room."""
    out = in_mount_namespace(
        tmp_path,
        """
        mount("-t", "tmpfs", "-o", "size=256k", "tmpfs", mnt)
        j = Journal.open(mnt + "/state.sqlite", site="s")
        written = 0
        try:
            for i in range(1000):
                j.append([event(i)])
                written += 1
        except StorageError as exc:
            out["error"] = str(exc)
        out["written"] = written
        failed = 0
        for i in range(written + 1, written + 4):  # the disk is still full: these wait too
            try:
                j.append([event(i)])
            except StorageError:
                failed += 1
        out["failed"] = failed
        out["backlog"] = j.backlog
        mount("-o", "remount,size=8m", mnt)
        out["flushed"] = [e.id for e in j.commit([])]
        out["times"] = [e.time for e in j.events(limit=1000)]
        j.close()
        """,
    )
    n = out["written"]
    assert "cannot write 1 event(s): database or disk is full (SQLITE_FULL)" in out["error"]
    assert 0 < n < 1000 and out["failed"] == 3 and out["backlog"] == 4
    assert out["flushed"] == list(range(n + 1, n + 5))
    assert out["times"] == [float(i) for i in range(n + 4)]  # none lost, in order


def test_full_database_keeps_events_in_the_backlog(tmp_path: Path):
    """With the database at its page limit, commit raises and the event waits; once there
    is room it is written first, before newer events."""
    j = Journal.open(str(tmp_path / "s.sqlite"), site="s")
    pages = j.connection.execute("PRAGMA page_count").fetchone()[0]
    j.connection.execute(f"PRAGMA max_page_count = {pages}")
    with pytest.raises(StorageError, match="database or disk is full"):
        j.append([event(1, size=20_000)])
    assert j.backlog == 1 and j.events() == []
    j.connection.execute("PRAGMA max_page_count = 1000000")
    stored = j.append([event(2)])
    assert [(e.id, e.time) for e in stored] == [(1, 1.0), (2, 2.0)] and j.backlog == 0
    j.close()


def test_states_that_could_not_be_written_are_kept(tmp_path: Path):
    """States from a failed commit are still returned by load_states and written later."""
    path = str(tmp_path / "s.sqlite")
    j = Journal.open(path, site="s")
    pages = j.connection.execute("PRAGMA page_count").fetchone()[0]
    j.connection.execute(f"PRAGMA max_page_count = {pages}")
    s = AlarmState("a", "high", active=True, unacknowledged=True, reason="y" * 20_000)
    with pytest.raises(StorageError):
        j.commit([event(1, size=20_000)], {"a": s})
    assert j.load_states()["a"] == s
    j.connection.execute("PRAGMA max_page_count = 1000000")
    j.close()
    assert Journal.open(path, site="s").load_states()["a"] == s


def test_close_with_an_unwritable_backlog_raises(tmp_path: Path):
    """close() says so when waiting events still cannot be written: no silent loss."""
    j = Journal.open(str(tmp_path / "s.sqlite"), site="s")
    pages = j.connection.execute("PRAGMA page_count").fetchone()[0]
    j.connection.execute(f"PRAGMA max_page_count = {pages}")
    with pytest.raises(StorageError):
        j.append([event(1, size=20_000)])
    with pytest.raises(StorageError, match="cannot write 1 event"):
        j.close()


def test_corrupt_file_is_reported_at_open(tmp_path: Path):
    """A file that is not an SQLite database fails at open with SQLite's reason."""
    path = tmp_path / "state.sqlite"
    path.write_bytes(b"this is no database " * 300)
    with pytest.raises(StorageError) as info:
        Journal.open(str(path), site="s")
    assert str(path) in str(info.value) and "file is not a database" in str(info.value)


def test_journal_from_a_newer_version_is_refused(tmp_path: Path):
    """A journal whose schema is newer than this program's is refused at open."""
    path = str(tmp_path / "state.sqlite")
    Journal.open(path, site="s").close()
    with sqlite3.connect(path) as c:
        c.execute("UPDATE meta SET value='99' WHERE key='schema_version'")
    c.close()
    with pytest.raises(StorageError, match="newer version"):
        Journal.open(path, site="s")
