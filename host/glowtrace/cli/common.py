"""What the commands share besides the consoles: the logbook path, the
confirmation of a deletion, the safety note."""

import argparse
import math
import sys
from pathlib import Path

from .. import paths
from ..errors import GlowtraceError

SAFETY_NOTE = ("Heater leads, shunts and the tube get hot; a shorted heater can "
               "burn a trace. Run the tester from a fused low-voltage supply.")


def db_path(args) -> Path:
    return Path(args.db) if args.db else paths.default_db_path()


def confirm(args, what: str, token: str) -> None:
    """Deleting needs --yes, or the name typed back at a terminal."""
    if args.yes:
        return
    if not sys.stdin.isatty():
        raise GlowtraceError(f"deleting {what} needs confirmation: add --yes")
    answer = input(f"This deletes {what}. Type {token!r} to confirm: ")
    if answer.strip() != token:
        raise GlowtraceError("not confirmed: nothing deleted")


def number(lo: float | None = None, hi: float | None = None, above: bool = False):
    """An argparse type: a finite number (never nan or inf) in [lo, hi],
    or above lo when `above`; argparse turns the refusal into one line."""
    def parse(text: str) -> float:
        try:
            x = float(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
        if not math.isfinite(x):
            raise argparse.ArgumentTypeError(f"{text!r} is not a finite number")
        if lo is not None and (x < lo or (above and x == lo)):
            raise argparse.ArgumentTypeError(
                f"{text} is too small: it must be {'more than' if above else 'at least'} {lo:g}")
        if hi is not None and x > hi:
            raise argparse.ArgumentTypeError(f"{text} is too large: it must be at most {hi:g}")
        return x
    parse.__name__ = "number"  # argparse names the type in its messages
    return parse
