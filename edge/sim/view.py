"""What the demo shows: one frame of the monitor's state, as a live terminal table (rich) or
as plain lines when stdout is not a terminal. Pure: it formats values it is given."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from rich.console import Group
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from edge.model import BarometerReading, PointState

__all__ = ["AlarmLine", "FlowLine", "Frame", "flow_cells", "plain_lines", "render"]

ZERO_CELSIUS = 273.15
PRIORITY_ORDER = {"critical": 0, "high": 1, "medium": 2, "low": 3}


@dataclass(frozen=True, slots=True)
class AlarmLine:
    name: str
    priority: str
    state: str  # ISA-18.2 state word from the engine
    active: bool
    unacknowledged: bool


@dataclass(frozen=True, slots=True)
class FlowLine:
    name: str
    mass_flow: float | None  # kg/s; None when bad
    energy_rate: float | None  # W
    mass_total: float  # kg since the last reset
    energy_total: float  # J
    not_measured: float  # s
    quality: str  # "good", "uncertain(outside_limits:...)", "bad(wet_steam)"


@dataclass(frozen=True, slots=True)
class Frame:
    elapsed: float  # s since the demo started
    site: str
    scenario: str
    scenario_summary: str
    points: Sequence[PointState]
    alarms: Sequence[AlarmLine]  # only those active or unacknowledged
    barometer: BarometerReading | None
    sources_up: int
    sources: int
    keys: Mapping[str, str]  # key -> scenario name, for the footer (empty: no keys)
    flows: Sequence[FlowLine] = ()


def _num(value: float | None, fmt: str, offset: float = 0.0) -> str:
    return "-" if value is None else format(value - offset, fmt)


def point_cells(p: PointState) -> tuple[str, str, str, str, str, str]:
    """(pressure bar(a), temperature degC, Tsat degC, superheat K, quality, hint) as text."""

    def v(q: str) -> float | None:
        r = p.get(q)
        return r.value if r.usable else None

    pressure = v("pressure")
    bar = None if pressure is None else pressure / 1e5
    return (
        _num(bar, ".4f" if bar is not None and bar < 1.0 else ".3f"),  # vacuum: 4 places
        _num(v("temperature"), ".1f", ZERO_CELSIUS),
        _num(v("tsat"), ".2f", ZERO_CELSIUS),
        _num(v("superheat"), "+.1f"),
        str(p.quality),
        p.hint_text or "",
    )


def flow_cells(f: FlowLine) -> tuple[str, str, str, str, str, str]:
    """(flow t/h, energy rate kW, total t, total GJ, not measured s, quality) as text."""
    return (
        _num(None if f.mass_flow is None else f.mass_flow * 3.6, ".3f"),
        _num(None if f.energy_rate is None else f.energy_rate / 1e3, ".0f"),
        f"{f.mass_total / 1e3:.4f}",
        f"{f.energy_total / 1e9:.4f}",
        f"{f.not_measured:.0f}",
        f.quality,
    )


def _alarms_sorted(alarms: Sequence[AlarmLine]) -> list[AlarmLine]:
    return sorted(alarms, key=lambda a: (PRIORITY_ORDER.get(a.priority, 9), a.name))


def _barometer_text(b: BarometerReading | None) -> str:
    if b is None:
        return "barometer -"
    text = f"barometer {b.value / 100:.1f} hPa ({b.origin})"
    return text if b.quality.good else f"{text} {b.quality}"


def plain_lines(frame: Frame) -> list[str]:
    """The frame as plain text lines (no colour, no cursor movement)."""
    head = (
        f"[{frame.elapsed:7.1f} s] scenario {frame.scenario} | {_barometer_text(frame.barometer)}"
        f" | sources up {frame.sources_up}/{frame.sources}"
    )
    lines = [head]
    for p in frame.points:
        pa, t, ts, sh, q, hint = point_cells(p)
        line = (
            f"  {p.name:12} p {pa:>7} bar(a)  T {t:>6} degC  Tsat {ts:>7} degC  "
            f"superheat {sh:>6} K  {q}"
        )
        lines.append(f"{line}  hint: {hint}" if hint else line)
    for f in frame.flows:
        q, kw, tot, gj, nm, qual = flow_cells(f)
        lines.append(
            f"  {f.name:12} flow {q:>7} t/h  energy {kw:>6} kW  total {tot} t  {gj} GJ  "
            f"not measured {nm} s  {qual}"
        )
    alarms = _alarms_sorted(frame.alarms)
    if alarms:
        lines.append(
            "  alarms: " + ", ".join(f"{a.name} ({a.priority}, {a.state})" for a in alarms)
        )
    else:
        lines.append("  alarms: none")
    return lines


_QUALITY_STYLE = {"good": "green", "uncertain": "yellow", "bad": "bold red"}
_PRIORITY_STYLE = {"critical": "bold red", "high": "red", "medium": "yellow", "low": "cyan"}


def render(frame: Frame) -> Group:
    """The frame as a rich renderable for ``rich.live.Live``."""
    table = Table(expand=False, box=None, pad_edge=False, header_style="bold")
    for column, justify in (
        ("point", "left"),
        ("state", "left"),
        ("p bar(a)", "right"),
        ("T degC", "right"),
        ("Tsat degC", "right"),
        ("superheat K", "right"),
        ("quality", "left"),
    ):
        table.add_column(column, justify=justify)  # type: ignore[arg-type]
    hints: list[Text] = []
    for p in frame.points:
        pa, t, ts, sh, q, hint = point_cells(p)
        table.add_row(
            p.name, p.state, pa, t, ts, sh, Text(q, style=_QUALITY_STYLE.get(p.quality.name, ""))
        )
        if hint:
            hints.append(Text(f"hint ({p.name}): {hint}", style="magenta"))
    flow_table = None
    if frame.flows:
        flow_table = Table(expand=False, box=None, pad_edge=False, header_style="bold")
        for column, justify in (
            ("flow", "left"),
            ("t/h", "right"),
            ("kW", "right"),
            ("total t", "right"),
            ("total GJ", "right"),
            ("not measured s", "right"),
            ("quality", "left"),
        ):
            flow_table.add_column(column, justify=justify)  # type: ignore[arg-type]
        for f in frame.flows:
            q, kw, tot, gj, nm, qual = flow_cells(f)
            style = _QUALITY_STYLE.get(qual.split("(")[0], "")
            flow_table.add_row(f.name, q, kw, tot, gj, nm, Text(qual, style=style))
    alarms = _alarms_sorted(frame.alarms)
    alarm_lines: list[Text] = [
        Text(f"{a.priority:8} {a.name}  [{a.state}]", style=_PRIORITY_STYLE.get(a.priority, ""))
        for a in alarms
    ] or [Text("no active or unacknowledged alarms", style="green")]
    head = Text(
        f"{frame.site} | scenario {frame.scenario}: {frame.scenario_summary}\n"
        f"{_barometer_text(frame.barometer)} | sources up {frame.sources_up}/{frame.sources}"
        f" | {frame.elapsed:.0f} s"
    )
    parts: list[object] = [head, table, *hints]
    if flow_table is not None:
        parts.append(flow_table)
    parts.append(Panel(Group(*alarm_lines), title="alarms"))
    if frame.keys:
        keys = "  ".join(f"{k} {name}" for k, name in frame.keys.items())
        parts.append(Text(f"keys: {keys}  q quit (advisory only: nothing is written)", "dim"))
    return Group(*parts)  # type: ignore[arg-type]
