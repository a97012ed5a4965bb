"""The ``steam-edge`` command. Each subcommand lives in ``edge/commands/<name>.py`` with
``add_arguments(parser)`` and ``main(args) -> int``; they are imported only when used."""

from __future__ import annotations

import argparse
import importlib
import os
import sys

from edge import __version__
from edge.errors import ConfigError, EdgeError

COMMANDS = {
    "run": ("run", "run the monitor with a config file"),
    "demo": ("demo", "run the plant simulator and the monitor together, with a live view"),
    "check": ("check", "validate a config file and print what it describes"),
    "calc": ("calc", "one-off steam figures: absolute pressure, Tsat, superheat, properties"),
    "flow": ("flow", "one-off flow figures: ISO 5167 orifice, nozzle, Venturi; compensation"),
    "probe": ("probe", "read registers or nodes once and show every plausible decoding"),
    "simulate": ("simulate", "serve the plant simulator over Modbus TCP and OPC UA"),
    "alarms": ("alarms", "list, acknowledge and shelve alarms of a running monitor"),
    "history": ("history", "print or export the stored history of a point or a tag"),
    "make-cert": ("make_cert", "create an OPC UA client key and self-signed certificate"),
}


EXIT_BROKEN_PIPE = 141  # 128 + SIGPIPE, what a shell reports for a tool stopped by a pipe


def build_parser(only: str | None = None) -> argparse.ArgumentParser:
    """The parser; with ``only``, just that subcommand's module is imported (start-up of a
    one-shot command such as ``probe`` must not pay for asyncua and scipy)."""
    parser = argparse.ArgumentParser(
        prog="steam-edge",
        description="Advisory steam plant monitor. It reads and computes; it never writes to "
        "a controller and never replaces certified safety controls.",
    )
    parser.add_argument("--version", action="version", version=f"steam-edge {__version__}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name, (module, help_text) in COMMANDS.items():
        p = sub.add_parser(name, help=help_text, description=help_text)
        if only is None or name == only:
            importlib.import_module(f"edge.commands.{module}").add_arguments(p)
        p.set_defaults(_module=module)
    return parser


def main(argv: list[str] | None = None) -> int:
    words = sys.argv[1:] if argv is None else argv
    first = next((w for w in words if not w.startswith("-")), None)
    parser = build_parser(first if first in COMMANDS else None)
    args = parser.parse_args(words)
    if not getattr(args, "_module", None):
        parser.print_help()
        return 2
    module = importlib.import_module(f"edge.commands.{args._module}")
    try:
        code = int(module.main(args) or 0)
        sys.stdout.flush()  # a reader that went away shows here, not at interpreter exit
        return code
    except BrokenPipeError:
        # `steam-edge calc ... | head -3`: the reader has all it wanted; stop quietly
        _silence_stdout()
        return EXIT_BROKEN_PIPE
    except ConfigError as exc:
        for problem in exc.problems:
            print(f"error: {problem}", file=sys.stderr)
        return 2
    except EdgeError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 1
    except KeyboardInterrupt:
        return 130


def _silence_stdout() -> None:
    """Point stdout at /dev/null, so the interpreter's last flush on exit cannot raise
    BrokenPipeError again (the recipe of the Python docs, "Note on SIGPIPE")."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):  # no real file descriptor (captured in tests)
        pass
