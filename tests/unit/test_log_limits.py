"""Rate-limited log lines (issue 10, items 5, 10 and 13): at most ``burst`` lines of a key
per window, the rest counted and reported by the next line written."""

from __future__ import annotations

from typing import Any

from edge.logs import Limited


class Sink:
    def __init__(self) -> None:
        self.lines: list[tuple[str, dict[str, Any]]] = []

    def warning(self, event: str, **fields: Any) -> None:
        self.lines.append((event, fields))


def test_a_burst_then_silence_then_a_line_saying_how_many_were_held():
    """burst 3 in a 60 s window: 100 calls write 3 lines; after the window the next line
    carries suppressed=97."""
    now = [0.0]
    sink = Sink()
    log = Limited(sink, window=60.0, burst=3, clock=lambda: now[0])
    written = sum(log("warning", "http_bad_request", peer="x") for _ in range(100))
    assert written == 3 and len(sink.lines) == 3
    now[0] = 61.0
    assert log("warning", "http_bad_request", peer="x")
    assert sink.lines[-1] == ("http_bad_request", {"peer": "x", "suppressed": 97})


def test_keys_have_their_own_budget():
    """A flood of one key does not silence another."""
    sink = Sink()
    log = Limited(sink, window=60.0, burst=1, clock=lambda: 0.0)
    for _ in range(10):
        log("warning", "a")
    assert log("warning", "b")
    assert [e for e, _ in sink.lines] == ["a", "b"]
