"""Start-up curves from other instruments (an oscilloscope export, a data
logger): CSV with a header row `time_s,volts,amps` (optional `light`), `#`
comment lines, time zero at switch-on and negative times before it.

The file is read as a stream, a chunk of rows at a time, into float64 rows
on disk (`logbook.floatrows`), and checked as it goes: a file of any length
is read in bounded memory, and everything is checked before anything is
stored. `analyze` and `import` read through the same checks, so they give
the same one-line errors."""

import csv
import math
import tempfile
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from .curve import Curve
from ..errors import GlowtraceError
from ..logbook import floatrows

REQUIRED = ("time_s", "volts", "amps")
OPTIONAL = ("light",)
MAX_BAD_SHARE = 0.05
# what a heater's start-up curve can be: far past these, the units are wrong
MAX_TIME_S = 3600.0   # the tester's own limit is 300 s; an hour is no start-up
MAX_VOLTS = 300.0     # single heaters are rated up to about 117 V
MAX_AMPS = 100.0      # rectifier filaments reach tens of amps at switch-on
LIVE_VOLTS = 0.05     # below this a heater carrying current has no voltage reading


class CurveFileError(GlowtraceError):
    pass


@dataclass
class CurveFile:
    """What scanning a CSV file found; its rows are in the spool file."""
    path: Path
    names: list                  # columns kept, in stored order
    n_rows: int = 0
    warnings: list = field(default_factory=list)


class _Checks:
    """Running checks over the chunks of one file."""

    def __init__(self, path: Path, names: list):
        self.path, self.names = path, names
        self.last_t = -math.inf
        self.t_min, self.t_max = math.inf, -math.inf
        self.on = self.dead_v = 0
        self.peak_a = -math.inf
        self.max_abs = dict.fromkeys(names, 0.0)

    def chunk(self, a: np.ndarray, lines: list) -> None:
        t = a[:, 0]
        steps = np.diff(np.concatenate([[self.last_t], t]))
        back = np.nonzero(steps <= 0)[0]
        if len(back):
            k = back[0]
            before = self.last_t if k == 0 else t[k - 1]
            raise CurveFileError(f"{self.path}, line {lines[k]}: time_s must increase from row "
                                 f"to row (it does not after t = {before:g} s)")
        self.last_t = t[-1]
        self.t_min, self.t_max = min(self.t_min, t[0]), max(self.t_max, t[-1])
        for k, n in enumerate(self.names):
            self.max_abs[n] = max(self.max_abs[n], float(np.abs(a[:, k]).max()))
        on = t >= 0
        self.on += int(on.sum())
        self.dead_v += int((a[on, 1] <= LIVE_VOLTS).sum())
        if on.any():
            self.peak_a = max(self.peak_a, float(a[on, 2].max()))

    def finish(self) -> None:
        p = self.path
        if self.on == 0:
            raise CurveFileError(f"{p}: no samples at or after switch-on (time_s >= 0)")
        if self.t_max > MAX_TIME_S or self.t_min < -MAX_TIME_S:
            raise CurveFileError(
                f"{p}: time_s runs from {self.t_min:g} to {self.t_max:g}, more than an hour: "
                "time_s is in seconds (are these milliseconds or sample numbers?)")
        units = {"volts": (MAX_VOLTS, "V"), "amps": (MAX_AMPS, "A")}
        for name, (limit, unit) in units.items():
            if self.max_abs[name] > limit:
                raise CurveFileError(
                    f"{p}: {name} reaches {self.max_abs[name]:.3g} {unit}, more than any "
                    f"heater's {limit:g} {unit}: is the column in {unit}, and scaled?")
        if self.dead_v > 0.5 * self.on:
            raise CurveFileError(
                f"{p}: volts is zero or negative in {self.dead_v} of the {self.on} samples "
                "after switch-on: a heater carrying current has a voltage across it "
                "(is the voltage probe connected, and the column the heater's volts?)")
        if self.peak_a <= 0:
            raise CurveFileError(
                f"{p}: amps is never positive after switch-on: is the current probe "
                "reversed, or the column another signal?")


def _rows(path: Path):
    """(line number, fields) of every data row, after the header row."""
    try:
        f = open(path, encoding="utf-8-sig", newline="")
    except FileNotFoundError:
        raise CurveFileError(f"{path}: no such file") from None
    except IsADirectoryError:
        raise CurveFileError(f"{path} is a directory, not a CSV file") from None
    except OSError as e:
        raise CurveFileError(f"{path}: cannot read it ({e.strerror})") from None
    line_no = [0]

    def data_lines():
        for n, line in enumerate(f, 1):
            if line.strip() and not line.lstrip().startswith("#"):
                if "\x00" in line:
                    raise CurveFileError(f"{path}, line {n}: not a text file")
                line_no[0] = n
                yield line
    with f:
        try:
            for fields in csv.reader(data_lines()):  # one reader: not one per line
                yield line_no[0], fields
        except UnicodeDecodeError as e:
            raise CurveFileError(f"{path}: not UTF-8 text (a binary file, or text in another "
                                 f"encoding: {e.reason} at byte {e.start})") from None
        except csv.Error as e:
            raise CurveFileError(f"{path}: cannot read it as CSV text ({e})") from None


def spool_curve(path: str | Path, spool) -> CurveFile:
    """Read and check a CSV curve, writing its rows as float64 to the binary
    file `spool`. Raises CurveFileError with one line saying what is wrong."""
    path = Path(path)
    rows = _rows(path)
    head = next(rows, None)
    if head is None:
        raise CurveFileError(f"{path}: no header row and no data")
    head_no, fields = head
    cols = [c.strip().lower() for c in fields]
    missing = [c for c in REQUIRED if c not in cols]
    if missing:
        raise CurveFileError(
            f"{path}, line {head_no}: the header must name the columns "
            f"{', '.join(REQUIRED)} (optional: light); missing: {', '.join(missing)}; "
            f"found: {', '.join(cols) or 'nothing'}")
    out = CurveFile(path, [c for c in REQUIRED + OPTIONAL if c in cols])
    extra = [c for c in cols if c not in REQUIRED + OPTIONAL]
    if extra:
        out.warnings.append(f"ignored column(s): {', '.join(extra)}")
    pos = [cols.index(c) for c in out.names]
    checks = _Checks(path, out.names)
    bad, bad_first = 0, None
    buf, lines = [], []

    def flush():
        a = np.array(buf, dtype="<f8")
        checks.chunk(a, lines)
        spool.write(a.tobytes())
        out.n_rows += len(a)
        buf.clear()
        lines.clear()

    for n, fields in rows:
        try:
            if len(fields) != len(cols):
                raise ValueError
            vals = [float(fields[p]) for p in pos]
            if not all(math.isfinite(x) for x in vals):
                raise ValueError
        except ValueError:
            bad += 1
            bad_first = bad_first or n
            continue
        buf.append(vals)
        lines.append(n)
        if len(buf) >= floatrows.CHUNK_ROWS:
            flush()
    if buf:
        flush()
    spool.flush()
    total = out.n_rows + bad
    if out.n_rows < 10:
        raise CurveFileError(f"{path}: only {out.n_rows} readable data rows; a curve needs more")
    if bad:
        if bad > MAX_BAD_SHARE * total:
            raise CurveFileError(
                f"{path}: {bad} of {total} data rows are unreadable (first at line "
                f"{bad_first}): is this the right file and a comma-separated export?")
        out.warnings.append(f"skipped {bad} unreadable row(s), first at line {bad_first}")
    checks.finish()
    return out


def curve_from_rows(rows, n_rows: int, names: list, label: str,
                    max_points: int | None = None) -> tuple[Curve, list]:
    """The Curve the analysis reads (reduced to at most max_points, default
    floatrows.MAX_POINTS), and a note when it was reduced."""
    a, k = floatrows.reduced(rows, n_rows, len(names), max_points or floatrows.MAX_POINTS)
    col = {n: a[:, j] for j, n in enumerate(names)}
    notes = [f"{n_rows} rows analysed as {len(a)} means of {k} consecutive rows"] if k > 1 else []
    return Curve(col["time_s"], col["volts"], col["amps"], col.get("light"), label=label), notes


def read_curve(path: str | Path, max_points: int | None = None) -> tuple[Curve, list[str]]:
    """The curve and a list of warnings about the file (skipped rows)."""
    with tempfile.TemporaryFile() as spool:
        info = spool_curve(path, spool)
        spool.seek(0)
        curve, notes = curve_from_rows(
            floatrows.rows_from_bytes(floatrows.read_chunks(spool), len(info.names)),
            info.n_rows, info.names, Path(path).name, max_points)
    return curve, info.warnings + notes


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
