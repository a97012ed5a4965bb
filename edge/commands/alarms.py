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
from typing import Any

from edge.alarms.text import COMMENT_MAX, USER_MAX, check_text
from edge.config.secrets import read_secret
from edge.errors import ConfigError, EdgeError

DEFAULT_URL = "http://127.0.0.1:9847"
TOKEN_ENV = "STEAMEDGE_API_TOKEN"
ACTIONS = {  # subcommand -> (API path word, needs a reason)
    "ack": ("ack", False),
    "shelve": ("shelve", True),
    "unshelve": ("unshelve", False),
    "out-of-service": ("out-of-service", True),
    "in-service": ("in-service", False),
}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--url", default=DEFAULT_URL, help=f"monitor URL (default {DEFAULT_URL})")
    parser.add_argument(
        "--token-env", metavar="NAME", help=f"variable holding the token ({TOKEN_ENV})"
    )
    parser.add_argument("--token-file", metavar="PATH", help="file holding the API token")
    parser.add_argument("--timeout", type=float, default=10.0, help="seconds (default 10)")
    sub = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    listing = sub.add_parser("list", help="show alarms (standing ones unless --all)")
    listing.add_argument("--all", action="store_true", help="also alarms in normal state")
    listing.add_argument("--json", action="store_true", help="print the API's JSON")
    for name, (_, needs_reason) in ACTIONS.items():
        p = sub.add_parser(name, help=f"{name.replace('-', ' ')} an alarm")
        p.add_argument("alarm", help="alarm name")
        p.add_argument("--user", default=_default_user(), help="who acts (default: login name)")
        p.add_argument(
            "--reason", "--comment", dest="reason", required=needs_reason, help="why (recorded)"
        )
        if name == "shelve":
            p.add_argument("--duration", help="e.g. '30 min'; without it: until it clears")


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


def _when(t: float | None) -> str:
    return time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(t)) if t else "-"


def _table(rows: list[dict[str, Any]]) -> str:
    header = ("ALARM", "PRIORITY", "STATE", "SINCE", "MESSAGE")
    lines = [
        (r["name"], r["priority"], r["state"], _when(r.get("since")), r.get("message", ""))
        for r in rows
    ]
    widths = [max(len(str(x)) for x in col) for col in zip(header, *lines, strict=False)]
    fmt = "  ".join(f"{{:<{w}}}" for w in widths[:-1]) + "  {}"
    return "\n".join(fmt.format(*row) for row in (header, *lines))


def main(args: argparse.Namespace) -> int:
    if args.action == "list":
        data = _request(args, "GET", "/api/v1/alarms")
        rows = data.get("alarms", [])
        if not args.all:
            rows = [r for r in rows if r["state"] != "normal"]
        if args.json:
            print(json.dumps(rows, indent=2))
        elif rows:
            print(_table(rows))
        else:
            print("no standing alarms" if not args.all else "no alarms configured")
        return 0
    word, _ = ACTIONS[args.action]
    # the same rule the monitor applies, checked here so a bad byte is named plainly
    body: dict[str, Any] = {"user": check_text(args.user, "--user", USER_MAX)}
    if args.reason:
        body["reason"] = check_text(args.reason, "--reason", COMMENT_MAX)
    if getattr(args, "duration", None):
        body["duration"] = args.duration
    name = urllib.parse.quote(args.alarm, safe="")
    data = _request(args, "POST", f"/api/v1/alarms/{name}/{word}", body)
    alarm = data.get("alarm") or {}
    events = ", ".join(e["kind"] for e in data.get("events", [])) or "no change"
    print(f"{args.alarm}: {alarm.get('state', '?')} ({events})")
    sys.stdout.flush()
    return 0
