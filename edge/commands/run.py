"""steam-edge run (not built yet)."""

from __future__ import annotations

import argparse


def add_arguments(parser: argparse.ArgumentParser) -> None:
    pass


def main(args: argparse.Namespace) -> int:
    raise SystemExit("steam-edge run: not available yet")
