"""What every command shares: consoles, the database option, output."""

import json
from pathlib import Path

from rich.console import Console

from . import paths

out = Console()
err = Console(stderr=True)

SAFETY_NOTE = ("Heater leads, shunts and the tube get hot; a shorted heater can "
               "burn a trace. Run the tester from a fused low-voltage supply.")


def _db(args) -> Path:
    return Path(args.db) if args.db else paths.default_db_path()


def _num(value, digits: int) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def _emit(args, data, render) -> None:
    if args.json:
        print(json.dumps(data, indent=2, default=str))
    else:
        render(data)


def _fmt(v, digits: int) -> str:
    if v is None:
        return "-"
    if isinstance(v, bool):
        return "yes" if v else "NO"
    if isinstance(v, float):
        return f"{v:.{digits}g}" if digits else str(v)
    return str(v)
