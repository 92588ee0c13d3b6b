"""The `glowtrace` command line: a thin layer over the library rooms.

Each command group is a module here with a `register(sub, common)` that adds
its commands; each command parses its options, calls one library function and
renders the result (`console.py` decides colour, `tables.py` fits tables to the
terminal). Only `main` turns library errors into one-line messages and exit
codes: 0 ok, 1 error, 2 capture incomplete (argparse also uses 2 for bad
options), 130 interrupted. Nothing outside this package imports it."""

import argparse
import os
import signal
import sys

from .. import __version__
from ..errors import GlowtraceError
from . import (analyze, captures, circuits, console, demo, hardware, judgement, logbook, session,
               tester)
from .common import SAFETY_NOTE

GROUPS = (tester, session, captures, analyze, logbook, judgement, circuits, hardware, demo)


def _global_options(p: argparse.ArgumentParser, defaults: bool) -> None:
    """--db, --json and --color, accepted before the command (on the main
    parser, with the defaults) and after it (on every command, where an
    option not given must not overwrite one given before the command)."""
    def d(value):
        return value if defaults else argparse.SUPPRESS
    p.add_argument("--db", metavar="PATH", default=d(None),
                   help="SQLite logbook (default: $GLOWTRACE_DB or "
                        "~/.local/share/glowtrace/glowtrace.db)")
    p.add_argument("--json", action="store_true", default=d(False),
                   help="print machine-readable JSON")
    p.add_argument("--color", choices=console.COLOR_CHOICES, default=d("auto"),
                   help="colour: auto (on a terminal, unless NO_COLOR is set or "
                        "TERM=dumb), always or never")


def build_parser() -> argparse.ArgumentParser:
    common = argparse.ArgumentParser(add_help=False)
    _global_options(common, defaults=False)
    p = argparse.ArgumentParser(
        prog="glowtrace",
        description="Bench instrument and logbook for vacuum-tube heaters.",
        epilog=SAFETY_NOTE)
    p.add_argument("--version", action="version", version=f"glowtrace {__version__}")
    _global_options(p, defaults=True)
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for group in GROUPS:
        group.register(sub, common)
    return p


def _interrupt(signum, frame):
    if signum == signal.SIGHUP:
        _detach_from_terminal()
    raise KeyboardInterrupt


def _detach_from_terminal() -> None:
    """After a hang-up the terminal is gone and writing to it fails (EIO):
    send what is still to be said to the null device, so storing the
    partial capture is not stopped by a message."""
    devnull = os.open(os.devnull, os.O_WRONLY)
    for fd in _on_terminal:
        os.dup2(devnull, fd)
    os.close(devnull)


_on_terminal: list = []  # stdout and stderr when they were a terminal at start


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)
    console.setup(args.color)
    # a polite kill (SIGTERM) and a closed terminal (SIGHUP) stop a capture
    # the way Ctrl-C does: heater off, the partial capture stored
    _on_terminal[:] = [fd for fd in (1, 2) if os.isatty(fd)]
    for sig in (signal.SIGTERM, signal.SIGHUP):
        signal.signal(sig, _interrupt)
    try:
        return args.func(args)
    except GlowtraceError as e:
        console.err.print(f"glowtrace: error: {e}", markup=False, highlight=False,
                          soft_wrap=True)  # one line, for scripts and logs
        return 1
    except KeyboardInterrupt:
        console.err.print("Interrupted.")
        return 130
    except BrokenPipeError:
        # the reader went away (`glowtrace list | head`): stop quietly
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0


if __name__ == "__main__":
    sys.exit(main())
