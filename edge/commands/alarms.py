"""steam-edge alarms: list, acknowledge, shelve and take alarms out of service on a running
monitor, through its HTTP API (for operators on the box).

The token comes from ``--token-file``, the variable named by ``--token-env``, or
``STEAMEDGE_API_TOKEN``; it is only sent, never printed.
"""

from __future__ import annotations

import argparse
import getpass
import json
import os
import sys
import time
import urllib.error
import urllib.parse
import urllib.request
from datetime import UTC, datetime
from typing import Any

from edge import units
from edge.alarms.messages import number_text
from edge.alarms.text import COMMENT_MAX, USER_MAX, check_text
from edge.config import PRIORITIES
from edge.config.secrets import read_secret
from edge.errors import ConfigError, EdgeError, UnitError
from edge.notify.base import iso_utc

DEFAULT_URL = "http://127.0.0.1:9847"
TOKEN_ENV = "STEAMEDGE_API_TOKEN"
ACTIONS = {  # subcommand -> (API path word, needs a reason)
    "ack": ("ack", False),
    "shelve": ("shelve", True),
    "unshelve": ("unshelve", False),
    "out-of-service": ("out-of-service", True),
    "in-service": ("in-service", False),
}


def _global_options(parser: argparse.ArgumentParser, *, sub: bool) -> None:
    """--url, --token-env, --token-file, --timeout: before or after the action. On the
    action's parser they default to SUPPRESS, so a value given before the action stays."""

    def default(value: Any) -> Any:
        return argparse.SUPPRESS if sub else value

    parser.add_argument(
        "--url", default=default(DEFAULT_URL), help=f"monitor URL (default {DEFAULT_URL})"
    )
    parser.add_argument(
        "--token-env",
        metavar="NAME",
        default=default(None),
        help=f"variable holding the token ({TOKEN_ENV})",
    )
    parser.add_argument(
        "--token-file", metavar="PATH", default=default(None), help="file holding the API token"
    )
    parser.add_argument("--timeout", type=float, default=default(10.0), help="seconds (default 10)")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    _global_options(parser, sub=False)
    sub = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    listing = sub.add_parser("list", help="show alarms (standing ones unless --all)")
    listing.add_argument("--all", action="store_true", help="also alarms in normal state")
    listing.add_argument("--json", action="store_true", help="print the API's JSON")
    _global_options(listing, sub=True)
    events = sub.add_parser("events", help="show the alarm journal, oldest first")
    events.add_argument(
        "--since", help="from this time on: '2026-05-01T06:00', or a span back, e.g. '2 h'"
    )
    events.add_argument("--alarm", help="only this alarm")
    events.add_argument("--limit", type=int, default=50, help="at most this many (default 50)")
    events.add_argument("--json", action="store_true", help="print the API's JSON")
    _global_options(events, sub=True)
    for name, (_, needs_reason) in ACTIONS.items():
        p = sub.add_parser(name, help=f"{name.replace('-', ' ')} an alarm")
        if name == "ack":
            p.add_argument("alarm", nargs="?", help="alarm name (or --priority / --all)")
            group = p.add_mutually_exclusive_group()
            group.add_argument(
                "--priority", choices=PRIORITIES, help="every alarm of this priority"
            )
            group.add_argument(
                "--all", action="store_true", help="every alarm waiting for acknowledgement"
            )
        else:
            p.add_argument("alarm", help="alarm name")
        p.add_argument("--user", default=_default_user(), help="who acts (default: login name)")
        p.add_argument(
            "--reason", "--comment", dest="reason", required=needs_reason, help="why (recorded)"
        )
        if name == "shelve":
            p.add_argument("--duration", help="e.g. '30 min'; without it: until it clears")
        _global_options(p, sub=True)


def _default_user() -> str:
    try:
        return os.environ.get("SUDO_USER") or getpass.getuser()
    except (KeyError, OSError):
        return "operator"


def _token(args: argparse.Namespace) -> str | None:
    """The token by the service's own secret rule (``edge.config.secrets``), so a file the
    service accepts works here byte for byte."""
    if args.token_file or args.token_env:
        env, file = (None, args.token_file) if args.token_file else (args.token_env, None)
        try:
            return read_secret(env, file, key="--token")
        except ConfigError as exc:
            raise EdgeError(exc.problems[0].message) from exc
    return os.environ.get(TOKEN_ENV, "").strip() or None


def _request(args: argparse.Namespace, method: str, path: str, body: Any = None) -> Any:
    url = args.url.rstrip("/") + path
    data = None if body is None else json.dumps(body).encode()
    headers = {"Accept": "application/json"}
    if data is not None:
        headers["Content-Type"] = "application/json"
    if method == "POST":
        token = _token(args)
        if token:
            headers["Authorization"] = f"Bearer {token}"
    req = urllib.request.Request(url, data=data, method=method, headers=headers)
    try:
        with urllib.request.urlopen(req, timeout=args.timeout) as r:
            return json.loads(r.read() or b"{}")
    except urllib.error.HTTPError as exc:
        try:
            err = json.loads(exc.read())
            detail = err.get("detail") or err.get("error") or exc.reason
        except ValueError:
            detail = exc.reason
        hint = ""
        if exc.code == 401:
            hint = f" (give the token with --token-file, --token-env or {TOKEN_ENV})"
        raise EdgeError(f"{exc.code}: {detail}{hint}") from exc
    except (urllib.error.URLError, OSError) as exc:
        reason = getattr(exc, "reason", exc)
        raise EdgeError(f"cannot reach the monitor at {args.url}: {reason}") from exc


def _local(t: str | float | None) -> str:
    """An API time (RFC 3339, UTC) as local time for people, to the second."""
    if t is None or t == "":
        return "-"
    try:
        if isinstance(t, str):
            when = datetime.fromisoformat(t)
        else:
            when = datetime.fromtimestamp(float(t), UTC)
    except (ValueError, OverflowError, OSError):
        return str(t)
    return when.astimezone().strftime("%Y-%m-%d %H:%M:%S")


def _table(header: tuple[str, ...], lines: list[tuple[Any, ...]]) -> str:
    widths = [max(len(str(x)) for x in col) for col in zip(header, *lines, strict=False)]
    fmt = "  ".join(f"{{:<{w}}}" for w in widths[:-1]) + "  {}"
    return "\n".join(fmt.format(*row) for row in (header, *lines))


def _shown(q: dict[str, Any] | None) -> str:
    """A value object of the API as an operator reads it: display value and unit."""
    if not q:
        return "-"
    shown = q.get("display") or q
    return f"{number_text(float(shown['value']))} {shown.get('unit', '')}".strip()


def _alarm_rows(rows: list[dict[str, Any]]) -> str:
    header = ("ALARM", "PRIORITY", "STATE", "IN", "VALUE IN", "LIVE", "MESSAGE")
    lines = []
    for r in rows:
        act = r.get("activation") or {}
        live = (r.get("live") or {}).get("value")
        lines.append(
            (
                r["name"],
                r["priority"],
                r["state"].replace("_", " "),
                _local(act.get("time") or r.get("since")),
                _shown(act.get("value")) if act else "-",
                _shown(live),
                r.get("message", ""),
            )
        )
    return _table(header, lines)


def _event_rows(rows: list[dict[str, Any]]) -> str:
    header = ("TIME", "ALARM", "EVENT", "STATE", "BY", "MESSAGE")
    lines = [
        (
            _local(e.get("time")),
            e["alarm"],
            e["kind"].replace("_", " "),
            (e.get("state") or "").replace("_", " "),
            e.get("user") or "-",
            e.get("message", "") + (f" ({e['comment']})" if e.get("comment") else ""),
        )
        for e in rows
    ]
    return _table(header, lines)


def _since(text: str, now: float) -> str:
    """--since as an RFC 3339 UTC time for the API: a time (local unless it says otherwise)
    or a span back from now ('2 h')."""
    try:
        return iso_utc(now - units.parse_duration(text))
    except UnitError:
        pass
    try:
        when = datetime.fromisoformat(text.strip())
    except ValueError as exc:
        raise EdgeError(
            f"--since {text!r}: give a time such as 2026-05-01T06:00 or a span such as '2 h'"
        ) from exc
    if when.tzinfo is None:
        when = when.astimezone()  # a time without a zone is local time
    return iso_utc(when.timestamp())


def _events(args: argparse.Namespace) -> int:
    if args.limit < 1:
        raise EdgeError("--limit must be 1 or more")
    query: dict[str, Any] = {"limit": min(args.limit, 1000)}
    if args.since:
        query["from"] = _since(args.since, time.time())
    if args.alarm:
        query["alarm"] = args.alarm
    rows: list[dict[str, Any]] = []
    since = 0
    while len(rows) < args.limit:
        query["since"] = since
        page = _request(args, "GET", "/api/v1/events?" + urllib.parse.urlencode(query))
        got = page.get("events", [])
        if not got:
            break
        rows += got
        since = page.get("next", since)
    rows = rows[: args.limit]
    if args.json:
        print(json.dumps(rows, indent=2))
    elif rows:
        print(_event_rows(rows))
    else:
        print("no events")
    return 0


def _said(target: str, data: dict[str, Any]) -> str:
    """'drum-quality: acknowledged', or 'drum-quality: acknowledged, cleared; now normal':
    the state is said once, not twice."""
    kinds = [e["kind"].replace("_", " ") for e in data.get("events", [])]
    state = ((data.get("alarm") or {}).get("state") or "").replace("_", " ")
    done = ", ".join(kinds) or "no change"
    if not state or (kinds and kinds[-1] == state):
        return f"{target}: {done}"
    return f"{target}: {done}; now {state}"


def _act(args: argparse.Namespace) -> int:
    word, _ = ACTIONS[args.action]
    # the same rule the monitor applies, checked here so a bad byte is named plainly
    body: dict[str, Any] = {"user": check_text(args.user, "--user", USER_MAX)}
    if args.reason:
        body["reason"] = check_text(args.reason, "--reason", COMMENT_MAX)
    if getattr(args, "duration", None):
        body["duration"] = args.duration
    if args.action == "ack" and (args.priority or args.all):
        if args.alarm:
            raise EdgeError("give an alarm name, or --priority / --all, not both")
        total = 0
        for priority in [args.priority] if args.priority else list(PRIORITIES):
            data = _request(args, "POST", f"/api/v1/priorities/{priority}/ack", body)
            done = [e for e in data.get("events", []) if e["kind"] == "acknowledged"]
            total += len(done)
            for e in done:
                print(f"{e['alarm']}: acknowledged")
        which = f"{args.priority} " if args.priority else ""
        print(
            f"{total} {which}alarm(s) acknowledged" if total else f"no {which}alarm to acknowledge"
        )
        return 0
    if not args.alarm:
        raise EdgeError("name the alarm (or use --priority P or --all)")
    name = urllib.parse.quote(args.alarm, safe="")
    data = _request(args, "POST", f"/api/v1/alarms/{name}/{word}", body)
    print(_said(args.alarm, data))
    sys.stdout.flush()
    return 0


def main(args: argparse.Namespace) -> int:
    if args.action == "list":
        data = _request(args, "GET", "/api/v1/alarms")
        rows = data.get("alarms", [])
        if not args.all:
            rows = [r for r in rows if r["state"] != "normal"]
        if args.json:
            print(json.dumps(rows, indent=2))
        elif rows:
            print(_alarm_rows(rows))
        else:
            print("no standing alarms" if not args.all else "no alarms configured")
        return 0
    if args.action == "events":
        return _events(args)
    return _act(args)
