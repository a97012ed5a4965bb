"""Modbus TCP and Modbus RTU source.

Every ``interval`` the source reads its plan (the fewest block reads, see ``plan``), decodes
and conditions every tag, and emits one Sample per tag: good values, or bad with a reason
(``comm_loss``, ``illegal_data_address``, ``sensor_fault`` ...) carrying the last good
value only as context. It never writes to a device (see ``modbus_link``).

Faults, and what the source does about them:

- exception 02 on a block: the block is halved until the bad address is found; the good
  tags keep their values in the same cycle and the plan remembers the lesson;
- other exception responses: the tags of that block are bad with the exception's reason;
- no answer from a unit: its remaining blocks are skipped for this cycle (bad/comm_loss),
  so one dead unit on a line costs one timeout, not one per block;
- a cycle with no data and a failed link: the connection is closed and reopened after a
  capped exponential backoff with jitter (at most ``backoff_max``, never over 30 s); the
  tags are bad/comm_loss every cycle meanwhile.
"""

from __future__ import annotations

import asyncio
import math
import random
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import Any

from edge.backoff import backoff_delay
from edge.config import ModbusRtuSource, ModbusTag, ModbusTcpSource
from edge.errors import ConfigError, UnitError
from edge.logs import get_logger
from edge.model import COMM_LOSS, GOOD, Level, Sample, bad
from edge.records import constructor
from edge.sources.base import Emit, SourceHealth
from edge.sources.condition import Conditioner
from edge.sources.decode import (
    REGISTER_COUNT,
    BlockDecoder,
    DecodeError,
    Decoder,
    make_decoder,
)
from edge.sources.modbus_link import Failure
from edge.sources.modbus_tcp import link_for
from edge.sources.plan import Read, ReadPlan, Span, split

__all__ = ["BACKOFF_BASE", "BACKOFF_CAP", "ModbusSource"]

BACKOFF_BASE = 0.5  # seconds before the first reconnect attempt (before jitter)
BACKOFF_CAP = 30.0  # never wait longer than this between attempts, whatever the config says

_NAN = math.nan


@dataclass(slots=True)
class _Tag:
    name: str
    condition: Conditioner
    linear: tuple[float, float, float, float] | None  # Conditioner.linear
    last_good: float | None = None


@dataclass(frozen=True, slots=True)
class _Compiled:
    """A planned read with its decoder and the positions of its tags."""

    read: Read
    indices: tuple[int, ...]  # positions in the source's tag list, in span order
    decode: BlockDecoder
    # per tag, in span order: (position, name, scale a, offset b, low, high, the _Tag), the
    # linear conditioning inline (a, b None: the tag's Conditioner decides)
    rows: tuple[tuple[int, str, float | None, float, float, float, _Tag], ...] = ()


@dataclass(slots=True)
class _CycleStats:
    data: bool = False  # at least one read returned registers
    link_failure: Failure | None = None
    dead_units: set[int] = field(default_factory=set)


# Sample(...) without the frozen dataclass __init__ (edge.records): the hot path
_new_sample = constructor(Sample)
_GOOD_LEVEL = Level.GOOD


class ModbusSource:
    """A Modbus TCP device or RTU line, polled on its own interval (``edge.sources.Source``).

    ``run(emit)`` polls until cancelled; ``read_once()`` does one cycle and returns the
    samples (for probes and tests). ``health`` holds the figures the metrics export.
    """

    def __init__(
        self,
        config: ModbusTcpSource | ModbusRtuSource,
        *,
        clock: Callable[[], float] = time.time,
        rng: random.Random | None = None,
    ) -> None:
        self.name = config.name
        self.config = config
        self.health = SourceHealth()
        self.cycles = 0
        self._clock = clock
        self._rng = rng or random.Random()
        self._link = link_for(config)
        self._log = get_logger(component="modbus", source=config.name)
        self._tags: list[_Tag] = []
        self._position: dict[str, int] = {}
        self._decoders: dict[str, Decoder] = {}
        spans: list[Span] = []
        for tag in config.tags:
            spans.append(self._add_tag(tag, config))
        self._plan = ReadPlan(tuple(spans), max_gap=config.max_gap)
        self._compiled = [self._compile(r) for r in self._plan.reads]
        self._attempt = 0  # failed link cycles in a row (backoff exponent)
        self._retry_at = 0.0  # monotonic time before which no reconnect is tried
        self._was_up: bool | None = None

    def _add_tag(self, tag: ModbusTag, config: ModbusTcpSource | ModbusRtuSource) -> Span:
        unit = tag.unit_id if tag.unit_id is not None else config.unit_id
        count = REGISTER_COUNT[tag.type]
        if tag.address + count - 1 > 65535:
            raise ConfigError(f"source {self.name} tag {tag.name}: runs past register 65535")
        try:
            conditioner = Conditioner(tag)
        except UnitError as exc:
            raise ConfigError(f"source {self.name} tag {tag.name}: {exc}") from exc
        self._position[tag.name] = len(self._tags)
        self._tags.append(_Tag(tag.name, conditioner, conditioner.linear))
        self._decoders[tag.name] = make_decoder(tag.type, tag.word_order, tag.byte_swap)
        return Span(tag.name, unit, tag.table, tag.address, count)

    def _compile(self, read: Read) -> _Compiled:
        items = [(read.offset(s), self._decoders[s.key]) for s in read.spans]
        indices = tuple(self._position[s.key] for s in read.spans)
        rows = []
        for i in indices:
            tag = self._tags[i]
            a, b, lo, hi = tag.linear if tag.linear is not None else (None, 0.0, 0.0, 0.0)
            rows.append((i, tag.name, a, b, lo, hi, tag))
        return _Compiled(read, indices, BlockDecoder(items, read.count), tuple(rows))

    @property
    def plan(self) -> ReadPlan:
        """The current read plan (it learns where addresses do not exist)."""
        return self._plan

    def _learn(self, plan: ReadPlan) -> None:
        self._plan = plan
        self._compiled = [self._compile(r) for r in plan.reads]

    @property
    def reads(self) -> tuple[Read, ...]:
        """The block reads of the current plan."""
        return self._plan.reads

    # -- the port --------------------------------------------------------------------

    async def run(self, emit: Emit) -> None:
        """Poll every ``interval`` until cancelled. A slow cycle skips the slots it
        overran; it never bursts to catch up."""
        loop = asyncio.get_running_loop()
        interval = self.config.interval
        next_at = loop.time()
        try:
            while True:
                emit(await self.read_once())
                next_at += interval
                now = loop.time()
                if next_at <= now:
                    next_at += (math.floor((now - next_at) / interval) + 1) * interval
                await asyncio.sleep(next_at - now)
        finally:
            self._link.close()

    async def read_once(self) -> list[Sample]:
        """One poll cycle: (re)connect if due, read the plan, a Sample for every tag."""
        self.cycles += 1
        out: list[Sample | None] = [None] * len(self._tags)
        started = time.perf_counter()
        try:
            attempted = await self._cycle(out)
        except Exception as exc:  # a bug must not kill the source; it is counted and logged
            self._log.exception("modbus_cycle_failed", error=str(exc))
            self.health.count_error("internal", f"{self.name}: {type(exc).__name__}: {exc}")
            self._link_down(Failure("internal", COMM_LOSS, True, str(exc)))
            out = [None] * len(self._tags)
            attempted = False
        if attempted:
            self.health.observe_read(time.perf_counter() - started, self._clock())
        return self._finish(out)

    async def close(self) -> None:
        self._link.close()

    # -- one cycle -------------------------------------------------------------------

    async def _cycle(self, out: list[Sample | None]) -> bool:
        """Fill ``out``; False when no read was attempted (link down, backing off).

        Reads are pipelined with decoding: the next request goes on the wire before the
        answer just received is decoded, so decoding hides behind the device's reply time.
        """
        if not self._link.connected:
            if time.monotonic() < self._retry_at:
                return False
            failure = await self._link.connect()
            if failure is not None:
                self.health.count_error(failure.kind, f"{self.name}: {failure.message}")
                self._link_down(failure)
                return False
        stats = _CycleStats()
        todo = iter(self._compiled)  # a snapshot: learning replaces the list
        link = self._link
        pending = self._launch(todo, stats)
        try:
            while pending is not None:
                compiled, request = pending
                outcome = await link.finish(request)
                pending = None  # finished: nothing of it left to cancel
                if isinstance(outcome, Failure) and outcome.comm:
                    stats.link_failure = outcome
                    stats.dead_units.add(compiled.read.unit)
                pending = self._launch(todo, stats)  # on the wire before we decode
                if pending is not None and isinstance(pending[1], asyncio.Future):
                    await asyncio.sleep(0)  # a library link sends from a task: let it
                await self._settle(compiled, outcome, out, stats)
        finally:
            if pending is not None and isinstance(pending[1], asyncio.Future):
                pending[1].cancel()  # only when cancelled or failing
        if stats.data:
            self._link_up()
        elif stats.link_failure is not None:
            self._link_down(stats.link_failure)
        else:  # the device answered, with exceptions only
            self.health.up = False
        return True

    def _launch(
        self, todo: Iterator[_Compiled], stats: _CycleStats
    ) -> tuple[_Compiled, Any] | None:
        """Start the next read worth sending (skipping units that stopped answering)."""
        for compiled in todo:
            read = compiled.read
            if read.unit in stats.dead_units:
                continue
            if stats.link_failure is not None and not self._link.connected:
                continue
            return compiled, self._link.start(read.table, read.unit, read.start, read.count)
        return None

    async def _settle(
        self,
        compiled: _Compiled,
        outcome: list[int] | Failure,
        out: list[Sample | None],
        stats: _CycleStats,
    ) -> bool:
        """Turn one read's outcome into samples; True if it returned registers."""
        now = self._clock()
        if not isinstance(outcome, Failure):
            stats.data = True
            self._decode(compiled, outcome, out, now)
            return True
        read = compiled.read
        last = read.start + read.count - 1
        where = f"unit {read.unit} {read.table} {read.start}..{last}"
        self.health.count_error(outcome.kind, f"{self.name}: {where}: {outcome.message}")
        if outcome.comm:
            stats.link_failure = outcome
            stats.dead_units.add(read.unit)
        elif outcome.code == 2:
            await self._locate_illegal_address(read, out, stats, now)
            return False
        self._blank(compiled.indices, outcome.reason, out, now)
        return False

    async def _read_now(self, read: Read, out: list[Sample | None], stats: _CycleStats) -> bool:
        outcome = await self._link.read(read.table, read.unit, read.start, read.count)
        return await self._settle(self._compile(read), outcome, out, stats)

    async def _locate_illegal_address(
        self, read: Read, out: list[Sample | None], stats: _CycleStats, now: float
    ) -> None:
        """Exception 02: halve the block until the address that does not exist is found."""
        if len(read.spans) == 1:
            span = read.spans[0]
            if span.key not in self._plan.alone:
                self._learn(self._plan.isolate(span))
                self._log.warning("modbus_illegal_address", tag=span.key, address=read.start)
            self._blank((self._position[span.key],), "illegal_data_address", out, now)
            return
        left, right = split(read)
        left_ok = await self._read_now(left, out, stats)
        right_ok = await self._read_now(right, out, stats)
        if left_ok and right_ok:
            self._learn(self._plan.cut_between(left, right))
            self._log.info(
                "modbus_gap_not_bridged", unit=read.unit, table=read.table, before=right.start
            )

    def _decode(
        self, compiled: _Compiled, registers: list[int], out: list[Sample | None], now: float
    ) -> None:
        try:
            raws = compiled.decode(registers)
        except DecodeError:
            self._blank(compiled.indices, "bad_response", out, now)
            return
        delivered = False
        make, good_q = _new_sample, GOOD
        for (index, name, a, b, lo, hi, tag), raw in zip(compiled.rows, raws, strict=True):
            if a is not None:  # the common case, inline: SI = raw * a + b in its bounds
                value = raw * a + b
                if lo <= value <= hi:
                    tag.last_good = value
                    delivered = True
                    out[index] = make(name, value, good_q, now, now, None)
                    continue
            value, quality = tag.condition(raw)  # out of range, NaN, infinity, not linear
            if quality.level is _GOOD_LEVEL:
                tag.last_good = value
                delivered = True
                out[index] = make(name, value, quality, now, now, None)
            else:
                out[index] = make(name, value, quality, now, now, tag.last_good)
        if delivered:
            self.health.delivered = True

    def _blank(
        self, indices: tuple[int, ...], reason: str, out: list[Sample | None], now: float
    ) -> None:
        quality = bad(reason)
        for index in indices:
            tag = self._tags[index]
            out[index] = _new_sample(tag.name, _NAN, quality, now, now, tag.last_good)

    def _finish(self, out: list[Sample | None]) -> list[Sample]:
        """Every tag not read this cycle is bad/comm_loss."""
        # by identity: ``None in out`` would call Sample.__eq__ (Python) for every tag
        missing = tuple(i for i, s in enumerate(out) if s is None)
        if missing:
            self._blank(missing, COMM_LOSS, out, self._clock())
        return out  # type: ignore[return-value]

    # -- link state ------------------------------------------------------------------

    def _link_up(self) -> None:
        self._attempt = 0
        self.health.up = True
        if self._was_up is not True:
            # the same event names for every protocol (OPC UA: edge.sources.opcua)
            self._log.info("source_up", protocol=self.config.protocol, reads=len(self._plan.reads))
        self._was_up = True

    def _next_delay(self) -> float:
        """The wait before the next connect attempt (one more failure in a row)."""
        self._attempt += 1
        cap = min(self.config.backoff_max, BACKOFF_CAP)
        return backoff_delay(self._attempt, base=BACKOFF_BASE, cap=cap, rand=self._rng.random())

    def _link_down(self, failure: Failure) -> None:
        self._link.close()
        delay = self._next_delay()
        self._retry_at = time.monotonic() + delay
        self.health.up = False
        if self._was_up is not False:
            self._log.warning(
                "source_down",
                protocol=self.config.protocol,
                kind=failure.kind,
                detail=failure.message,
                retry_in=round(delay, 3),
            )
        self._was_up = False
