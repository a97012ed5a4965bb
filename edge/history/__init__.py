"""The embedded history of process values: every point's absolute pressure, temperature,
Tsat and superheat and every tag's raw value, at full rate for recent hours and as
1-minute and 10-minute min/mean/max for the retention period, in its own SQLite file.

    writer = HistoryWriter(WriterSettings.from_config(path, config.storage.history))
    writer.start(); writer.set_layout(points, tags)
    writer.record(now, points, snapshot, sources)      # each evaluation pass
    HistoryReader.open(path, ladder).query("drum.pressure", since, until, step, now)
"""

from edge.history.buckets import Run, Tier, choose_tier, fold, tiers
from edge.history.frames import POINT_SERIES, Frame, Layout, point_series
from edge.history.store import HistoryReader, HistoryStore, Series, SourceChange, history_path
from edge.history.times import parse_instant, parse_step, rfc3339
from edge.history.writer import HistoryWriter, WriterSettings, default_ladder

__all__ = [
    "POINT_SERIES",
    "Frame",
    "HistoryReader",
    "HistoryStore",
    "HistoryWriter",
    "Layout",
    "Run",
    "Series",
    "SourceChange",
    "Tier",
    "WriterSettings",
    "choose_tier",
    "default_ladder",
    "fold",
    "history_path",
    "parse_instant",
    "parse_step",
    "point_series",
    "rfc3339",
    "tiers",
]
