"""Files the commands write (figures, reports, CSV lists): the path checked
before any work is done, so a typing slip costs one clear line and not a
finished analysis, and a name made from a tube's label that stays a plain
file name in the chosen folder whatever the label holds."""

import os
import re
import tempfile
from contextlib import contextmanager
from pathlib import Path

from .errors import GlowtraceError

FIGURE = (".png", ".svg", ".pdf")
MAX_NAME = 80


class OutputError(GlowtraceError):
    pass


def check(path: str | Path, suffixes: tuple = (), default_suffix: str | None = None) -> Path:
    """The path a file will be written to: not a folder, in a folder that
    exists and can be written, with a known suffix (default_suffix added
    when there is none, and the returned path says so)."""
    p = Path(path)
    if str(path) == "" or p.is_dir():
        raise OutputError(f"{path!r} is a folder, not a file name: give one, e.g. "
                          f"{p / ('NAME' + (default_suffix or (suffixes or ('.txt',))[0]))}")
    if not p.suffix and default_suffix:
        p = p.with_name(p.name + default_suffix)
    if suffixes and p.suffix.lower() not in suffixes:
        raise OutputError(f"{p}: cannot write a {p.suffix or 'suffix-less'} file here; "
                          f"use {', '.join(suffixes)}")
    folder = p.parent
    if not folder.is_dir():
        raise OutputError(f"{p}: there is no folder {folder} (make it first)")
    if not os.access(folder, os.W_OK):
        raise OutputError(f"{p}: the folder {folder} is read-only")
    return p


def safe_name(label: str) -> str:
    """A label as a plain file name: path separators, dots at the start and
    anything but letters, digits, '.', '-' and '_' become '_'."""
    name = re.sub(r"[^\w.-]", "_", label, flags=re.ASCII).lstrip(".")
    return (name or "_")[:MAX_NAME]


@contextmanager
def replacing(path: Path, mode: str = "w", **kw):
    """Write to a temporary file beside path and move it into place at the
    end: a failed write leaves no half file and an old file unharmed."""
    fd, tmp = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".tmp")
    try:
        with os.fdopen(fd, mode, **kw) as f:
            yield f
        os.replace(tmp, path)
    except OSError as e:
        Path(tmp).unlink(missing_ok=True)
        raise OutputError(f"cannot write {path}: {e.strerror or e}") from None
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise
