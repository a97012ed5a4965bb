"""Block planning: many tags -> the fewest Modbus reads. Pure: no I/O, no protocol library.

Tags of one unit id and one table are sorted by address and merged greedily into reads of
at most ``max_count`` registers (125, the Modbus limit for function codes 3 and 4),
bridging gaps of up to ``max_gap`` unused registers. Greedy left-to-right merging gives the
fewest reads for this kind of interval cover.

A device answers exception 02 (illegal data address) when any register of a read does not
exist, so one bad address inside a bridged gap, or one mistyped tag address, would blind
every tag of the block. The shell then splits the failed read in two (``split``) and tries
both halves; the plan learns from the outcome:

- both halves read fine: the bad address lies in the gap between them, so that gap is never
  bridged again (``ReadPlan.cut_between``);
- a read of a single tag fails: that tag is read on its own from then on, and no other read
  bridges across it (``ReadPlan.isolate``).

So a bad address costs a few extra requests once, and the good tags keep their values in
the very cycle where it was found.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field

__all__ = ["MAX_REGISTERS", "Read", "ReadPlan", "Span", "plan_reads", "split"]

MAX_REGISTERS = 125  # Modbus application protocol v1.1b3, read holding/input registers


@dataclass(frozen=True, slots=True)
class Span:
    """The registers one tag occupies."""

    key: str  # tag name
    unit: int
    table: str  # holding | input
    address: int
    count: int

    @property
    def end(self) -> int:
        """One past the last register."""
        return self.address + self.count


@dataclass(frozen=True, slots=True)
class Read:
    """One request: ``count`` registers from ``start`` of one unit's table."""

    unit: int
    table: str
    start: int
    count: int
    spans: tuple[Span, ...]

    def offset(self, span: Span) -> int:
        return span.address - self.start


def _read_of(spans: list[Span] | tuple[Span, ...]) -> Read:
    start = min(s.address for s in spans)
    end = max(s.end for s in spans)
    first = spans[0]
    return Read(first.unit, first.table, start, end - start, tuple(spans))


def _order(span: Span) -> tuple[int, str, int, int, str]:
    return (span.unit, span.table, span.address, -span.count, span.key)


def plan_reads(
    spans: Iterable[Span],
    *,
    max_gap: int = 8,
    max_count: int = MAX_REGISTERS,
    cuts: frozenset[tuple[int, str, int]] = frozenset(),
    alone: frozenset[str] = frozenset(),
) -> tuple[Read, ...]:
    """Merge spans into the fewest reads.

    ``cuts`` holds ``(unit, table, address)``: a span starting at that address never joins
    the read of the spans before it. ``alone`` holds tag keys read on their own, which no
    read bridges across either. Raises ValueError for a span wider than ``max_count``.
    """
    reads: list[Read] = []
    group: list[Span] = []
    group_end = 0
    for span in sorted(spans, key=_order):
        if span.count > max_count:
            raise ValueError(f"{span.key}: {span.count} registers exceed one read")
        if group:
            first = group[0]
            joins = (
                span.unit == first.unit
                and span.table == first.table
                and span.key not in alone
                and first.key not in alone
                and (span.unit, span.table, span.address) not in cuts
                and span.address - group_end <= max_gap
                and max(group_end, span.end) - first.address <= max_count
            )
            if joins:
                group.append(span)
                group_end = max(group_end, span.end)
                continue
            reads.append(_read_of(group))
        group = [span]
        group_end = span.end
    if group:
        reads.append(_read_of(group))
    return tuple(reads)


def split(read: Read) -> tuple[Read, Read]:
    """Halve a read by its spans (for locating an illegal address). Needs two spans or more."""
    if len(read.spans) < 2:
        raise ValueError("a read of one tag cannot be split")
    middle = len(read.spans) // 2
    return _read_of(read.spans[:middle]), _read_of(read.spans[middle:])


@dataclass(frozen=True, slots=True)
class ReadPlan:
    """The reads of one source, and what it has learnt about addresses that do not exist."""

    spans: tuple[Span, ...]
    max_gap: int = 8
    max_count: int = MAX_REGISTERS
    cuts: frozenset[tuple[int, str, int]] = frozenset()
    alone: frozenset[str] = frozenset()
    reads: tuple[Read, ...] = field(default=(), compare=False)

    def __post_init__(self) -> None:
        reads = plan_reads(
            self.spans,
            max_gap=self.max_gap,
            max_count=self.max_count,
            cuts=self.cuts,
            alone=self.alone,
        )
        object.__setattr__(self, "reads", reads)

    def _with(self, cuts: frozenset[tuple[int, str, int]], alone: frozenset[str]) -> ReadPlan:
        return ReadPlan(self.spans, self.max_gap, self.max_count, cuts, alone)

    def cut_between(self, left: Read, right: Read) -> ReadPlan:
        """Both halves of a failed read succeeded: never bridge the gap between them."""
        first = min(right.spans, key=_order)
        return self._with(self.cuts | {(first.unit, first.table, first.address)}, self.alone)

    def isolate(self, span: Span) -> ReadPlan:
        """A single tag's read failed with an illegal address: read it alone from now on."""
        return self._with(self.cuts, self.alone | {span.key})

    @property
    def register_count(self) -> int:
        return sum(r.count for r in self.reads)
