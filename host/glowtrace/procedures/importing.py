"""`glowtrace import`: a curve recorded elsewhere stored as a capture of a
tube section, then analysed like the tester's own."""

import math
import tempfile
import uuid as uuidlib
from datetime import datetime, timedelta, timezone

from .. import catalogue
from ..analysis.runner import analyze_stored
from ..analysis.csvio import spool_curve
from ..errors import GlowtraceError
from ..logbook.records import ensure_tube, get_tube, sections_of
from ..logbook.store import Store


EARLIEST_YEAR = 1900  # older dates are typing errors (and year 1 overflows in UTC)


def parse_when(text: str) -> str:
    """An ISO 8601 date-time (naive means UTC) as a UTC ISO string; not in
    the future."""
    try:
        d = datetime.fromisoformat(text.strip().replace("Z", "+00:00"))
    except ValueError:
        raise GlowtraceError(f"--at {text!r} is not an ISO 8601 date-time "
                             "(for example 2026-03-14T09:30:00+01:00)") from None
    if d.tzinfo is None:
        d = d.replace(tzinfo=timezone.utc)
    if d.year < EARLIEST_YEAR:
        raise GlowtraceError(f"--at {text!r} is before {EARLIEST_YEAR}: give the date of "
                             "the recording")
    d = d.astimezone(timezone.utc)
    if d > datetime.now(timezone.utc) + timedelta(minutes=5):
        raise GlowtraceError(f"--at {text!r} is in the future")
    return d.isoformat(timespec="milliseconds")


def import_curve(store: Store, path: str, tube: str, type_name: str | None, section: str,
                 at: str, ambient_c: float) -> tuple[str, dict, list[str]]:
    """Store and analyse one curve; returns (uuid, analysis, file warnings).
    Everything is checked before anything is written; the file is read as
    a stream (any length, bounded memory)."""
    with tempfile.TemporaryFile() as spool:
        return _import(store, path, spool, tube, type_name, section, at, ambient_c)


def _import(store, path, spool, tube, type_name, section, at, ambient_c):
    when = parse_when(at)
    if not (math.isfinite(ambient_c) and -40 <= ambient_c <= 80):
        raise GlowtraceError("--ambient-c must be a room temperature in C (-40..80)")
    existing = get_tube(store, tube)
    if type_name:
        type_name = catalogue.load().get(type_name).name
        if existing and existing["type"] and existing["type"] != type_name:
            raise GlowtraceError(f"tube {tube!r} is recorded as a {existing['type']}, "
                                 f"not a {type_name}")
    elif existing is None:
        raise GlowtraceError(f"no tube {tube!r} yet: give its --type to record it")
    kind = type_name or existing["type"]
    if section not in sections_of(kind):
        raise GlowtraceError(f"type {kind} has section(s) {', '.join(sections_of(kind))}, "
                             f"not {section}")
    dup = store.db.execute("SELECT uuid FROM captures WHERE tube = ? AND section = ? AND "
                           "started_at = ?", [tube, section, when]).fetchone()
    if dup:
        raise GlowtraceError(f"tube {tube!r} section {section} already has a capture at "
                             f"{when} ({dup[0][:8]}): imported before?")
    info = spool_curve(path, spool)  # the whole file checked before anything is stored
    ensure_tube(store, tube, type_name)
    uuid = str(uuidlib.uuid4())
    store.save_imported(uuid, tube, section, when, ambient_c, spool, info.names, info.n_rows,
                        str(path))
    return uuid, analyze_stored(store, uuid), info.warnings
