"""steam-edge history: print or export what the embedded history holds for a point or a
tag, straight from the history file beside the state file (the monitor need not run; a
running one keeps writing meanwhile). The same query words and answer as
``GET /api/v1/history``: samples with SI and display values and quality, and the
sources' up/down changes of the window (alarm events: ``steam-edge alarms`` or the API).
"""

from __future__ import annotations

import argparse
import json
import re
import sys
import time
from types import SimpleNamespace
from typing import Any

from multidict import MultiDict

from edge.errors import HistoryQueryError, StorageError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("-c", "--config", required=True, metavar="FILE", help="config file")
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--point", help="a point name")
    what.add_argument("--tag", action="append", help="a tag name (repeatable): its raw value")
    parser.add_argument(
        "--quantity",
        action="append",
        choices=("pressure", "temperature", "tsat", "superheat"),
        help="with --point (repeatable; default all four)",
    )
    parser.add_argument(
        "--since",
        default="1h",
        help="how far back (10m, 24h, 7d; or --since=-10m) or an RFC 3339 time (default 1h)",
    )
    parser.add_argument("--until", default="now", help="RFC 3339 or relative (default now)")
    parser.add_argument("--step", help="fold to this step: 10s, 1min, 1h (min/mean/max)")
    out = parser.add_mutually_exclusive_group()
    out.add_argument("--csv", action="store_true", help="CSV rows, as /api/v1/history.csv")
    out.add_argument("--json", action="store_true", help="JSON, as /api/v1/history")
    parser.add_argument("-o", "--output", metavar="FILE", help="write there instead of stdout")


_BACK = re.compile(r"^\d+(\.\d+)?\s*(s|m|min|h|d|w)$")


def _back(word: str) -> str:
    """``10m`` means ten minutes back, as ``-10m`` does (a leading minus reads as an
    option to the shell's argument parser unless written ``--since=-10m``)."""
    return "-" + word.strip() if _BACK.match(word.strip()) else word


def _query(args: argparse.Namespace) -> MultiDict[str]:
    q: MultiDict[str] = MultiDict(since=_back(args.since), until=_back(args.until))
    if args.step:
        q["step"] = args.step
    if args.point:
        q["point"] = args.point
        for quantity in args.quantity or []:
            q.add("quantity", quantity)
    for tag in args.tag or []:
        q.add("tag", tag)
    return q


def main(args: argparse.Namespace) -> int:
    from edge.config import load_config
    from edge.history import WriterSettings
    from edge.web.history import answer, csv_text

    config = load_config(args.config)
    settings = WriterSettings.from_config(config)
    if settings is None:
        raise StorageError("storage.history.enabled is false in this config: nothing is kept")
    face = SimpleNamespace(
        config=config, history=settings, journal=None, alarm_defs={}, barometer=None,
        clock=time.time,
    )  # fmt: skip
    if args.quantity and not args.point:
        raise HistoryQueryError("--quantity goes with --point")
    result = answer(face, _query(args))
    if args.csv:
        text = csv_text(result)
    elif args.json:
        text = json.dumps(result, indent=1) + "\n"
    else:
        text = table(result)
    if args.output:
        with open(args.output, "w", encoding="utf-8", newline="") as f:
            f.write(text)
        count = sum(len(s["samples"]) for s in result["series"])
        print(f"wrote {count} samples to {args.output}", file=sys.stderr)
    else:
        sys.stdout.write(text)
    return 0


def table(result: dict[str, Any]) -> str:
    """One line per time, one column per series (display units), quality beside a value
    that is not good; then the source changes."""
    series = result["series"]
    rows: dict[str, dict[str, str]] = {}
    for s in series:
        for x in s["samples"]:
            v = x["display"]
            cell = "-" if v is None else f"{v:.6g}"
            if x["quality"] != "good":
                cell += f" ({x['quality']})"
            rows.setdefault(x["time"], {})[s["name"]] = cell
    heads = [f"{s['name']} [{s['display_unit']}]" for s in series]
    widths = [max(len(h), 12) for h in heads]
    lines = [
        f"# {result['since']} .. {result['until']}; "
        + ", ".join(f"{s['name']}: {s['resolution']}" for s in series),
        "time".ljust(24) + "  ".join(h.rjust(w) for h, w in zip(heads, widths, strict=True)),
    ]
    for t in sorted(rows):
        cells = rows[t]
        lines.append(
            t.ljust(24)
            + "  ".join(
                cells.get(s["name"], "").rjust(w) for s, w in zip(series, widths, strict=True)
            )
        )
    for c in result["sources"]:
        state = "up" if c["up"] else "down"
        detail = f" ({c['detail']})" if c.get("detail") else ""
        lines.append(f"# source {c['source']} {state} at {c['time']}{detail}")
    return "\n".join(lines) + "\n"
