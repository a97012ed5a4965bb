"""The demo's terminal loop: once a second, a frame of the running monitor, shown as a live
table (and number keys switch the simulator's scenario) or printed as plain lines."""

from __future__ import annotations

import asyncio
import contextlib
import os
import sys
import time
from collections.abc import Callable, Iterator
from typing import Any

from edge.sim import scenarios
from edge.sim.view import AlarmLine, FlowLine, Frame, plain_lines, render

__all__ = ["KEYS", "frame_of", "show"]

KEYS = {str(i): name for i, name in enumerate(scenarios.SCENARIOS, start=1)}


def frame_of(monitor: Any, sim: Any, elapsed: float, keys: dict[str, str]) -> Frame:
    """A frame from a running ``edge.service.Monitor`` and ``edge.sim.runner.Simulator``."""
    points = monitor.points
    order = [p.name for p in monitor.config.points]
    alarms = [
        AlarmLine(s.name, s.priority, s.state, s.active, s.unacknowledged)
        for s in monitor.alarm_states.values()
        if s.active or s.unacknowledged
    ]
    sources = monitor.sources
    runtime = monitor.runtime
    flows = []
    if runtime is not None:
        for name in runtime.plan.flows:
            f, t = runtime.flows.get(name), runtime.totals.get(name)
            usable = f is not None and f.usable
            flows.append(
                FlowLine(
                    name=name,
                    mass_flow=f.mass_flow if usable else None,
                    energy_rate=f.energy_rate if usable else None,
                    mass_total=t.mass if t is not None else 0.0,
                    energy_total=t.energy if t is not None else 0.0,
                    not_measured=t.not_measured if t is not None else 0.0,
                    quality=str(f.quality) if f is not None else "bad(no_data)",
                )
            )
    return Frame(
        elapsed=elapsed,
        site=monitor.config.site,
        scenario=sim.scenario.name,
        scenario_summary=sim.scenario.summary,
        points=[points[n] for n in order if n in points],
        alarms=alarms,
        barometer=monitor.barometer,
        sources_up=sum(1 for s in sources.values() if s.health.up),
        sources=len(sources),
        keys=keys,
        flows=flows,
    )


@contextlib.contextmanager
def _keystrokes(on_key: Callable[[str], None]) -> Iterator[bool]:
    """Single keystrokes from a terminal on stdin (cbreak mode, restored on exit). Yields
    whether keys are being read."""
    try:
        import termios
        import tty

        fd = sys.stdin.fileno()
        if not sys.stdin.isatty():
            raise OSError("stdin is not a terminal")
        saved = termios.tcgetattr(fd)
    except (ImportError, OSError, ValueError, AttributeError):
        yield False
        return
    loop = asyncio.get_running_loop()

    def readable() -> None:
        with contextlib.suppress(OSError):
            for key in os.read(fd, 32).decode(errors="replace"):
                on_key(key)

    tty.setcbreak(fd)
    loop.add_reader(fd, readable)
    try:
        yield True
    finally:
        loop.remove_reader(fd)
        termios.tcsetattr(fd, termios.TCSADRAIN, saved)


async def show(
    monitor: Any, sim: Any, stop: asyncio.Event, *, duration: float | None, plain: bool
) -> None:
    """Show frames once a second until ``stop`` is set or ``duration`` has passed."""
    started = time.monotonic()
    deadline = None if duration is None else started + duration

    def on_key(key: str) -> None:
        if key in ("q", "Q"):
            stop.set()
        elif key in KEYS:
            sim.set_scenario(KEYS[key])

    async def tick() -> bool:
        """Wait for the next frame; False when it is time to stop."""
        wait = 1.0 if deadline is None else min(1.0, deadline - time.monotonic())
        if wait > 0:
            with contextlib.suppress(TimeoutError):
                await asyncio.wait_for(stop.wait(), wait)
        return not stop.is_set() and (deadline is None or time.monotonic() < deadline)

    if plain:
        while True:
            frame = frame_of(monitor, sim, time.monotonic() - started, {})
            print("\n".join(plain_lines(frame)), flush=True)
            if not await tick():
                return
    from rich.console import Console
    from rich.live import Live

    console = Console()
    with _keystrokes(on_key) as reading:
        keys = KEYS if reading else {}
        frame = frame_of(monitor, sim, 0.0, keys)
        # one frame a second, drawn when it is made: no refresh thread redrawing the same
        # frame in between (a quarter of the demo's CPU at rich's default pace)
        with Live(render(frame), console=console, auto_refresh=False) as live:
            live.refresh()
            while await tick():
                frame = frame_of(monitor, sim, time.monotonic() - started, keys)
                live.update(render(frame), refresh=True)
