"""Start-up curves from other instruments (an oscilloscope export, a data
logger): CSV with a header row `time_s,volts,amps` (optional `light`), `#`
comment lines, time zero at switch-on and negative times before it."""

import csv
import math
from pathlib import Path

import numpy as np

from .curve import Curve
from ..errors import GlowtraceError

REQUIRED = ("time_s", "volts", "amps")
OPTIONAL = ("light",)
MAX_BAD_SHARE = 0.05


class CurveFileError(GlowtraceError):
    pass


def read_curve(path: str | Path) -> tuple[Curve, list[str]]:
    """The curve and a list of warnings about the file (skipped rows)."""
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise CurveFileError(f"{path}: no such file") from None
    except (OSError, UnicodeDecodeError) as e:
        raise CurveFileError(f"{path}: cannot read it as text ({e})") from None
    lines = [(n, line) for n, line in enumerate(text.splitlines(), 1)
             if line.strip() and not line.lstrip().startswith("#")]
    if not lines:
        raise CurveFileError(f"{path}: no header row and no data")
    head_no, head = lines[0]
    cols = [c.strip().lower() for c in next(csv.reader([head]))]
    missing = [c for c in REQUIRED if c not in cols]
    if missing:
        raise CurveFileError(
            f"{path}, line {head_no}: the header must name the columns "
            f"{', '.join(REQUIRED)} (optional: light); missing: {', '.join(missing)}; "
            f"found: {', '.join(cols) or 'nothing'}")
    warnings = []
    extra = [c for c in cols if c not in REQUIRED + OPTIONAL]
    if extra:
        warnings.append(f"ignored column(s): {', '.join(extra)}")
    want = [c for c in REQUIRED + OPTIONAL if c in cols]
    pos = [cols.index(c) for c in want]
    rows, bad = [], []
    for n, line in lines[1:]:
        fields = next(csv.reader([line]))
        try:
            if len(fields) != len(cols):
                raise ValueError
            vals = [float(fields[p]) for p in pos]
            if not all(math.isfinite(x) for x in vals):
                raise ValueError
        except ValueError:
            bad.append(n)
            continue
        rows.append(vals)
    total = len(rows) + len(bad)
    if len(rows) < 10:
        raise CurveFileError(f"{path}: only {len(rows)} readable data rows; a curve needs more")
    if bad:
        if len(bad) > MAX_BAD_SHARE * total:
            raise CurveFileError(
                f"{path}: {len(bad)} of {total} data rows are unreadable (first at line "
                f"{bad[0]}): is this the right file and a comma-separated export?")
        warnings.append(f"skipped {len(bad)} unreadable row(s), first at line {bad[0]}")
    a = np.array(rows)
    t = a[:, 0]
    back = np.nonzero(np.diff(t) <= 0)[0]
    if len(back):
        raise CurveFileError(f"{path}: time_s must increase from row to row "
                             f"(it does not after t = {t[back[0]]:g} s)")
    if not (t >= 0).any():
        raise CurveFileError(f"{path}: no samples at or after switch-on (time_s >= 0)")
    light = a[:, want.index("light")] if "light" in want else None
    return Curve(t, a[:, 1], a[:, 2], light, label=path.name), warnings


def write_curve(path: str | Path, c: Curve, comment: str = "") -> None:
    """The same format, for exporting a stored capture's section."""
    cols = ["time_s", "volts", "amps"] + (["light"] if c.light is not None else [])
    data = [c.t, c.v, c.i] + ([c.light] if c.light is not None else [])
    with open(path, "w", newline="") as f:
        for line in comment.splitlines():
            f.write(f"# {line}\n")
        w = csv.writer(f)
        w.writerow(cols)
        for row in zip(*data):
            w.writerow([f"{x:.9g}" for x in row])
