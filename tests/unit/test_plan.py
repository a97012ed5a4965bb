"""Block planning: the fewest reads, and learning from illegal addresses (pure)."""

from __future__ import annotations

import pytest

from edge.sources.plan import MAX_REGISTERS, Read, ReadPlan, Span, plan_reads, split


def _s(key: str, address: int, count: int = 1, unit: int = 1, table: str = "holding") -> Span:
    return Span(key, unit, table, address, count)


def _ranges(reads: tuple[Read, ...]) -> list[tuple[int, str, int, int]]:
    return [(r.unit, r.table, r.start, r.count) for r in reads]


def test_adjacent_tags_one_read():
    """Contiguous tags become one read."""
    reads = plan_reads([_s("a", 0, 2), _s("b", 2, 2), _s("c", 4)])
    assert _ranges(reads) == [(1, "holding", 0, 5)]


def test_gap_within_max_gap_is_bridged():
    """A gap of exactly max_gap registers is bridged."""
    reads = plan_reads([_s("a", 0), _s("b", 9)], max_gap=8)
    assert _ranges(reads) == [(1, "holding", 0, 10)]


def test_gap_beyond_max_gap_splits():
    """A gap one register wider than max_gap starts a new read."""
    reads = plan_reads([_s("a", 0), _s("b", 10)], max_gap=8)
    assert _ranges(reads) == [(1, "holding", 0, 1), (1, "holding", 10, 1)]


def test_max_gap_zero_merges_only_adjacent():
    """With max_gap 0 only touching tags merge."""
    reads = plan_reads([_s("a", 0), _s("b", 1), _s("c", 3)], max_gap=0)
    assert _ranges(reads) == [(1, "holding", 0, 2), (1, "holding", 3, 1)]


def test_tables_and_units_never_merge():
    """Holding and input registers, and different unit ids, are separate reads."""
    reads = plan_reads([_s("a", 0), _s("b", 1, table="input"), _s("c", 2, unit=2), _s("d", 1)])
    assert _ranges(reads) == [
        (1, "holding", 0, 2),
        (1, "input", 1, 1),
        (2, "holding", 2, 1),
    ]


def test_read_never_exceeds_125_registers():
    """300 contiguous registers need three reads of at most 125 (Modbus spec limit)."""
    spans = [_s(f"t{i}", i) for i in range(300)]
    reads = plan_reads(spans)
    assert [r.count for r in reads] == [125, 125, 50]
    assert MAX_REGISTERS == 125


def test_value_never_split_across_reads():
    """A float32 that would straddle the 125 limit moves whole into the next read."""
    spans = [_s("a", 0, 124), _s("b", 124, 2)]
    reads = plan_reads(spans)
    assert _ranges(reads) == [(1, "holding", 0, 124), (1, "holding", 124, 2)]


def test_overlapping_tags_share_registers():
    """Two tags over the same registers are read once."""
    reads = plan_reads([_s("as_float", 10, 2), _s("high_word", 10), _s("low_word", 11)])
    assert _ranges(reads) == [(1, "holding", 10, 2)]
    assert {s.key for s in reads[0].spans} == {"as_float", "high_word", "low_word"}


def test_offsets_inside_read():
    """Each tag knows its offset in the read."""
    (read,) = plan_reads([_s("a", 100, 2), _s("b", 104)])
    assert {s.key: read.offset(s) for s in read.spans} == {"a": 0, "b": 4}


def test_unsorted_input():
    """Config order does not matter."""
    reads = plan_reads([_s("c", 20), _s("a", 0), _s("b", 5)])
    assert _ranges(reads) == [(1, "holding", 0, 6), (1, "holding", 20, 1)]


def test_oversized_span_rejected():
    """A span wider than one read is refused."""
    with pytest.raises(ValueError):
        plan_reads([_s("a", 0, 126)])


def test_split_halves_by_tags():
    """split() halves a read by its tags and each half covers only its tags."""
    (read,) = plan_reads([_s("a", 0), _s("b", 3), _s("c", 6, 2), _s("d", 9)])
    left, right = split(read)
    assert (left.start, left.count, [s.key for s in left.spans]) == (0, 4, ["a", "b"])
    assert (right.start, right.count, [s.key for s in right.spans]) == (6, 4, ["c", "d"])


def test_split_single_tag_refused():
    """A read of one tag cannot be split."""
    (read,) = plan_reads([_s("a", 0)])
    with pytest.raises(ValueError):
        split(read)


def test_plan_cut_keeps_gap_unbridged():
    """After cut_between, the gap between the halves is never bridged again."""
    plan = ReadPlan((_s("a", 0), _s("b", 4), _s("c", 8)), max_gap=8)
    assert len(plan.reads) == 1
    left, right = split(plan.reads[0])  # a | b c
    learnt = plan.cut_between(left, right)
    assert _ranges(learnt.reads) == [(1, "holding", 0, 1), (1, "holding", 4, 5)]


def test_plan_isolate_reads_tag_alone_and_unbridged():
    """An isolated tag is read alone and no read bridges across it."""
    plan = ReadPlan((_s("a", 0), _s("bad", 4), _s("c", 8)), max_gap=8)
    learnt = plan.isolate(plan.spans[1])
    assert _ranges(learnt.reads) == [
        (1, "holding", 0, 1),
        (1, "holding", 4, 1),
        (1, "holding", 8, 1),
    ]


def test_plan_learning_is_kept():
    """Lessons accumulate: a later isolate keeps an earlier cut."""
    spans = tuple(_s(k, a) for k, a in [("a", 0), ("b", 2), ("c", 4), ("d", 6)])
    plan = ReadPlan(spans)
    left, right = split(plan.reads[0])
    plan = plan.cut_between(left, right).isolate(spans[3])
    assert _ranges(plan.reads) == [
        (1, "holding", 0, 3),
        (1, "holding", 4, 1),
        (1, "holding", 6, 1),
    ]
    assert plan.cuts == frozenset({(1, "holding", 4)})
    assert plan.alone == frozenset({"d"})


def test_bench_layout_read_count():
    """200 float32 and 600 int16 with small gaps: 1,000 registers in 12 reads."""
    spans = []
    address = 0
    for i in range(200):
        spans.append(_s(f"f{i}", address, 2))
        address += 2
        for j in range(3):
            spans.append(_s(f"i{i}_{j}", address))
            address += 1
        address += 2  # a small gap
    plan = ReadPlan(tuple(spans))
    assert sum(s.count for s in spans) == 1000
    assert all(r.count <= 125 for r in plan.reads)
    # 1,400 addresses spanned; 125-register reads cover them in ceil(1400 / 125) = 12 at
    # best, and greedy reads never cut a value in two.
    assert len(plan.reads) == 12
