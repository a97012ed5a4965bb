"""steam-edge alarms (not built yet)."""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    pass


def main(args: argparse.Namespace) -> int:
    raise SystemExit("steam-edge alarms: not available yet")
