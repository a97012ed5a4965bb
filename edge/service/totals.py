"""Flow totals on disk: one row per flow in ``flow-totals.sqlite`` beside the state file.

Written after every evaluation pass in one transaction (WAL, ``synchronous=NORMAL``: a
killed process loses nothing that was committed, so a SIGKILL costs at most the pass in
progress; a power cut may cost the last few passes). Loaded at start: the gap while the
monitor was down counts as not measured (the last rates are dropped on load).
"""

from __future__ import annotations

import os
import sqlite3
from collections.abc import Mapping
from dataclasses import replace

from edge.errors import StorageError
from edge.flow import Totals

__all__ = ["TotalsStore", "totals_path"]

_SCHEMA = """
CREATE TABLE IF NOT EXISTS flow_totals (
    flow TEXT PRIMARY KEY,
    mass REAL NOT NULL,
    energy REAL NOT NULL,
    not_measured REAL NOT NULL,
    uncertain REAL NOT NULL,
    energy_not_measured REAL NOT NULL DEFAULT 0,
    since REAL,
    last_time REAL
);
"""


def totals_path(state_path: str) -> str:
    """The totals file beside the state file (``storage.path``)."""
    return os.path.join(os.path.dirname(os.path.abspath(state_path)), "flow-totals.sqlite")


class TotalsStore:
    """The totals file; ``StorageError`` names the path and reason on any failure."""

    def __init__(self, path: str, conn: sqlite3.Connection) -> None:
        self.path = path
        self._conn = conn

    @classmethod
    def open(cls, path: str) -> TotalsStore:
        try:
            conn = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
            conn.execute("PRAGMA journal_mode=WAL")
            conn.execute("PRAGMA synchronous=NORMAL")
            conn.executescript(_SCHEMA)
            columns = {r[1] for r in conn.execute("PRAGMA table_info(flow_totals)")}
            if "energy_not_measured" not in columns:  # a file from before that column
                conn.execute(
                    "ALTER TABLE flow_totals ADD COLUMN energy_not_measured REAL NOT NULL DEFAULT 0"
                )
        except (sqlite3.Error, OSError) as exc:
            raise StorageError(f"flow totals {path}: cannot open: {exc}") from exc
        return cls(path, conn)

    def load(self) -> dict[str, Totals]:
        """Every stored flow's totals, without last rates (the time since is not measured)."""
        try:
            rows = self._conn.execute(
                "SELECT flow, mass, energy, not_measured, uncertain, since, last_time, "
                "energy_not_measured FROM flow_totals"
            ).fetchall()
        except sqlite3.Error as exc:
            raise StorageError(f"flow totals {self.path}: cannot read: {exc}") from exc
        return {
            r[0]: fresh(
                Totals(
                    mass=r[1],
                    energy=r[2],
                    not_measured=r[3],
                    uncertain=r[4],
                    since=r[5],
                    last_time=r[6],
                    energy_not_measured=r[7],
                )
            )
            for r in rows
        }

    def save(self, totals: Mapping[str, Totals]) -> None:
        """Write every flow's totals in one transaction."""
        rows = [
            (
                n,
                t.mass,
                t.energy,
                t.not_measured,
                t.uncertain,
                t.since,
                t.last_time,
                t.energy_not_measured,
            )
            for n, t in totals.items()
        ]
        try:
            with self._conn:
                self._conn.execute("BEGIN")
                self._conn.executemany(
                    "INSERT INTO flow_totals (flow, mass, energy, not_measured, uncertain, "
                    "since, last_time, energy_not_measured) VALUES (?, ?, ?, ?, ?, ?, ?, ?) "
                    "ON CONFLICT(flow) DO UPDATE SET mass=excluded.mass, "
                    "energy=excluded.energy, not_measured=excluded.not_measured, "
                    "uncertain=excluded.uncertain, since=excluded.since, "
                    "last_time=excluded.last_time, "
                    "energy_not_measured=excluded.energy_not_measured",
                    rows,
                )
        except sqlite3.Error as exc:
            raise StorageError(f"flow totals {self.path}: cannot write: {exc}") from exc

    def close(self) -> None:
        try:
            self._conn.close()
        except sqlite3.Error as exc:
            raise StorageError(f"flow totals {self.path}: cannot close: {exc}") from exc


def fresh(totals: Totals) -> Totals:
    """Loaded totals: the last rates dropped, so the gap until the first pass is not counted."""
    return replace(totals, last_mass_flow=None, last_energy_rate=None)
