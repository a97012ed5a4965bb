"""steam-edge run: the monitor as a long-running service (systemd, Docker or a terminal)."""

from __future__ import annotations

import argparse
import asyncio
import signal
import sys

from edge import ADVISORY_NOTICE, __version__, logs


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("-c", "--config", required=True, metavar="FILE", help="config file")
    parser.add_argument(
        "--log-format",
        choices=("json", "console"),
        default="json",
        help="json lines to stdout (default) or a console view for humans",
    )
    parser.add_argument(
        "--log-level", choices=("debug", "info", "warning", "error"), default="info"
    )


def banner() -> str:
    return f"steam-edge {__version__} - ADVISORY ONLY\n{ADVISORY_NOTICE}\n"


def _early_stop(_signum: int, _frame: object) -> None:
    raise SystemExit(0)  # SIGTERM while still starting: nothing to flush yet


def main(args: argparse.Namespace) -> int:
    signal.signal(signal.SIGTERM, _early_stop)  # the loop takes over once it runs
    logs.configure(args.log_format, args.log_level, capture_stdlib=True)

    from edge.service import serve

    sys.stderr.write(banner())
    sys.stderr.flush()
    asyncio.run(serve(args.config))
    return 0
