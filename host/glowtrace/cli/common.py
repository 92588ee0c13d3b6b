"""What the commands share besides the consoles: the logbook path, the
confirmation of a deletion, the safety note."""

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
