"""Where the command line writes, and how: the two consoles, the colour choice,
one palette, JSON output and number formatting.

Colour is an accent, never the message: every status is printed as its word,
and the word stays when colour is off. Colour is off when the output is not a
terminal (a pipe, a file), with NO_COLOR set (no-color.org), with TERM=dumb, or
with --color never; --color always forces it. Off means no colour or style
sequence at all, so saved output and screen readers get plain text (a progress
bar on a terminal still moves its cursor; it is never written to a pipe)."""

import json
import os

from rich.console import Console
from rich.text import Text

COLOR_CHOICES = ("auto", "always", "never")

# the one palette: a status word's accent, everywhere the status is shown
STATUS_STYLE = {"steady": "green", "no baseline yet": "cyan", "watch": "yellow", "drifting": "magenta",
                "at limit": "bold red", "heater fault": "bold red"}
WARN = "yellow"
GOOD = "green"
BAD = "bold red"

out = Console()
err = Console(stderr=True)


def colour_off_by_environment(environ=os.environ) -> bool:
    return bool(environ.get("NO_COLOR")) or environ.get("TERM") == "dumb"


def _console(stderr: bool, choice: str) -> Console:
    if choice == "never" or (choice == "auto" and colour_off_by_environment()):
        return Console(stderr=stderr, color_system=None)
    if choice == "always":
        c = Console(stderr=stderr, force_terminal=True)
        return c if c.color_system else Console(stderr=stderr, force_terminal=True,
                                                color_system="standard")
    return Console(stderr=stderr)  # rich: colour only on a terminal


def setup(choice: str = "auto") -> None:
    """Make the consoles for this run (called once the options are parsed)."""
    global out, err
    out = _console(False, choice)
    err = _console(True, choice)


def colour_on(console: Console | None = None) -> bool:
    return (console or out).color_system is not None


def status_text(status: str, bold: bool = False) -> Text:
    style = STATUS_STYLE.get(status, "")
    return Text(status, style=f"bold {style}" if bold and style else style)


def warn(message: str) -> None:
    err.print(Text(message, style=WARN))


def emit(args, data, render) -> None:
    """JSON with --json (never coloured), else the command's own rendering."""
    if args.json:
        print(json.dumps(data, indent=2, default=str))
    else:
        render(data)


def fmt(v, digits: int) -> str:
    """A figure to `digits` significant digits; '-' when missing."""
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "NO"
    if isinstance(v, float):
        return f"{v:.{digits}g}" if digits else str(v)
    return str(v)


def fixed(value, digits: int) -> str:
    """A figure to `digits` decimals; '-' when missing."""
    return "-" if value is None else f"{value:.{digits}f}"
