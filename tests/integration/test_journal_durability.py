"""Restart durability: what a process committed survives a SIGKILL of that process."""

from __future__ import annotations

import os
import select
import signal
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import pytest

from edge.alarms.definitions import AlarmDef
from edge.alarms.engine import step
from edge.alarms.journal import Journal
from edge.model import GOOD, Reading

pytestmark = pytest.mark.slow  # starts processes

REPO = Path(__file__).resolve().parents[2]

WRITER = textwrap.dedent(
    """
    import sys
    from edge.alarms.engine import AlarmState
    from edge.alarms.journal import Journal
    from edge.model import AlarmEvent

    j = Journal.open(sys.argv[1], site="millbrook-dairy")
    for i in range(100_000):
        state = AlarmState("drum-p-high", "high", active=True, unacknowledged=True,
                           since=float(i), active_since=0.0, condition=True)
        e = AlarmEvent(alarm="drum-p-high", kind="realarm" if i else "raised", time=float(i),
                       priority="high", value=1.05e6, limit=1e6, message=f"event {i}",
                       state="unacknowledged")
        [stored] = j.commit([e], {"drum-p-high": state})
        print(stored.id, flush=True)  # only after the commit returned
    """
)


def read_ids(proc: subprocess.Popen, count: int, deadline: float) -> list[int]:
    """Ids the writer reported as committed, until ``count`` of them or the deadline."""
    assert proc.stdout is not None
    ids: list[int] = []
    while len(ids) < count and time.monotonic() < deadline:
        ready, _, _ = select.select([proc.stdout], [], [], max(0.0, deadline - time.monotonic()))
        if ready:
            line = proc.stdout.readline()
            if not line:
                break
            ids.append(int(line))
    return ids


def test_committed_events_and_states_survive_sigkill(tmp_path: Path):
    """Kill -9 a process mid-stream of commits: every event it reported committed is in the
    journal after reopening, the file is intact, and the alarm is still unacknowledged."""
    path = str(tmp_path / "state.sqlite")
    proc = subprocess.Popen(
        [sys.executable, "-c", WRITER, path],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        cwd=REPO,
    )
    try:
        ids = read_ids(proc, 40, time.monotonic() + 30.0)
    finally:
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
        proc.stdout.close()  # type: ignore[union-attr]
        proc.stderr.close()  # type: ignore[union-attr]
    assert proc.returncode == -signal.SIGKILL
    assert len(ids) == 40, "the writer did not report 40 commits in 30 s"

    j = Journal.open(path, site="millbrook-dairy")
    try:
        assert j.connection.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        stored = {e.id for e in j.events(limit=1000)}
        assert set(ids) <= stored  # nothing reported committed was lost
        assert sorted(stored) == list(range(1, len(stored) + 1))  # no hole, no half event
        s = j.load_states()["drum-p-high"]
        assert (s.active, s.unacknowledged, s.state) == (True, True, "unacknowledged")
        assert s.since >= max(ids) - 1  # the state saved with the last reported event
        d = AlarmDef(name="drum-p-high", signal="x", kind="high", priority="high", limit=1e6)
        _, events = step({d.name: d}, j.load_states(), {"x": Reading(1.05e6, GOOD)}, 1e6)
        assert events == []  # still active and unacknowledged: not announced again as new
    finally:
        j.close()
