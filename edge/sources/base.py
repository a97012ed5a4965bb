"""The one port every protocol implements, and the health figures a source keeps."""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Protocol

from edge.model import Sample

Emit = Callable[[list[Sample]], None]

# Buckets of steamedge_source_read_seconds (seconds).
READ_BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0)


@dataclass
class SourceHealth:
    """Live figures of one source; the metrics collector reads them at scrape time."""

    up: bool = False
    delivered: bool = False  # at least one good sample since start
    reads: int = 0
    read_sum: float = 0.0
    bucket_counts: list[int] = field(default_factory=lambda: [0] * len(READ_BUCKETS))
    errors: dict[str, int] = field(default_factory=dict)  # by kind: timeout, exception_02, ...
    last_error: str = ""
    last_read_time: float = 0.0

    def observe_read(self, seconds: float, now: float | None = None) -> None:
        self.reads += 1
        self.read_sum += seconds
        for i, bound in enumerate(READ_BUCKETS):
            if seconds <= bound:
                self.bucket_counts[i] += 1
                break
        self.last_read_time = time.time() if now is None else now

    def count_error(self, kind: str, message: str = "") -> None:
        self.errors[kind] = self.errors.get(kind, 0) + 1
        if message:
            self.last_error = message


class Source(Protocol):
    """A protocol adapter. ``run`` reads until cancelled and emits a Sample for every tag
    every cycle (bad/``comm_loss`` while the link is down). It never raises on plant
    faults; it counts them in ``health``."""

    name: str
    health: SourceHealth

    async def run(self, emit: Emit) -> None: ...
