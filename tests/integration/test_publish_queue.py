"""The store-and-forward queue on a real SQLite file: order, the bound, alarm events kept,
values thinned oldest-first and counted, survival across a reopen."""

from __future__ import annotations

from edge.publish.queue import Queue


def rec(kind: str, n: int) -> dict:
    return {"type": kind, "name": f"{kind}{n}", "time": n}


def test_records_come_back_in_order(tmp_path):
    """peek returns records oldest first; remove takes them away up to an id."""
    q = Queue(str(tmp_path / "q.sqlite"))
    q.put([rec("point", i) for i in range(5)], 0.0)
    got = q.peek(3)
    assert [g.record["name"] for g in got] == ["point0", "point1", "point2"]
    q.remove(got[-1].id)
    assert [g.record["name"] for g in q.peek()] == ["point3", "point4"] and q.size == 2


def test_beyond_the_bound_values_thin_oldest_first(tmp_path):
    """Bound 5, 3 alarms and 6 values: the 4 oldest values go, every alarm stays."""
    q = Queue(str(tmp_path / "q.sqlite"), bound=5)
    q.put([rec("alarm", 0), rec("point", 0), rec("point", 1), rec("alarm", 1)], 0.0)
    q.put([rec("point", i) for i in range(2, 6)] + [rec("alarm", 2)], 1.0)
    names = [g.record["name"] for g in q.peek()]
    assert names == ["alarm0", "alarm1", "point4", "point5", "alarm2"]
    assert (q.dropped, q.dropped_alarms, q.size) == (4, 0, 5)


def test_full_of_alarms_drops_the_oldest_alarm_counted(tmp_path):
    """Bound 2 and three alarm events: the oldest goes and is counted apart."""
    q = Queue(str(tmp_path / "q.sqlite"), bound=2)
    q.put([rec("alarm", i) for i in range(3)], 0.0)
    assert [g.record["name"] for g in q.peek()] == ["alarm1", "alarm2"]
    assert (q.dropped, q.dropped_alarms) == (0, 1)


def test_queue_survives_a_reopen(tmp_path):
    """Records and meta values are still there after closing and opening the file."""
    path = str(tmp_path / "q.sqlite")
    q = Queue(path)
    q.put([rec("alarm", 1)], 5.0)
    q.set_meta("next_session", "3")
    q.close()
    again = Queue(path)
    assert [(g.queued, g.record["name"]) for g in again.peek()] == [(5.0, "alarm1")]
    assert again.get_meta("next_session") == "3" and again.size == 1
