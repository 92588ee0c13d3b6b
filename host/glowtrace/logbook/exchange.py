"""Moving logbooks between benches: a whole-database export, and a merge of
another bench's database by capture UUID (nothing twice)."""

import sqlite3
import tempfile
from pathlib import Path

from .. import outfile
from ..errors import GlowtraceError, StoreError
from .store import Store


def export_db(store: Store, path: str | Path) -> int:
    """A consistent copy of the whole logbook (VACUUM INTO); returns bytes."""
    path = outfile.check(path)
    if path.exists():
        raise GlowtraceError(f"{path} exists: choose a new file name")
    try:
        store.db.execute("VACUUM INTO ?", [str(path)])
    except sqlite3.DatabaseError as e:
        raise GlowtraceError(f"export to {path} failed: {e}") from None
    return path.stat().st_size


# tables in dependency order, with the key that identifies a row across benches
_MERGE = [("owners", ("name",)), ("tubes", ("label",)), ("tester_records", ("hash",)),
          ("captures", ("uuid",)),
          ("capture_samples", ("capture_uuid",)), ("analyses", ("capture_uuid", "version")),
          ("section_metrics", ("capture_uuid", "section", "version")),
          ("baselines", ("tube", "section"))]


def _check_other(store: Store, other: Path) -> Path:
    """The other logbook, refused with a reason before anything is copied."""
    if other.is_dir():
        raise GlowtraceError(f"{other} is a folder: give the other bench's logbook file")
    if not other.is_file():
        raise GlowtraceError(f"no logbook at {other}")
    if other.stat().st_size == 0:
        raise GlowtraceError(f"{other} is an empty file, not a glowtrace logbook")
    if other.resolve() == store.path.resolve():
        raise GlowtraceError(f"{other} is this logbook itself: nothing to merge")
    return other


def _copy_logbook(other: Path, copy: Path) -> None:
    """A consistent copy of the other logbook, read-only on the original
    (SQLite's backup, so a logbook in use is copied whole); refused when it is
    not a glowtrace logbook."""
    try:
        src = sqlite3.connect(f"{other.resolve().as_uri()}?mode=ro", uri=True)
        try:
            tables = {r[0] for r in src.execute(
                "SELECT name FROM sqlite_master WHERE type = 'table'")}
            if "schema_migrations" not in tables:
                raise GlowtraceError(f"{other} is not a glowtrace logbook (" + (
                    "an SQLite database of another program)" if tables else "an empty one)"))
            dst = sqlite3.connect(copy)
            with dst:
                src.backup(dst)
            dst.close()
        finally:
            src.close()
    except sqlite3.DatabaseError as e:
        raise GlowtraceError(f"{other} is not a glowtrace logbook ({e})") from None


def merge_db(store: Store, other: str | Path) -> dict:
    """Copy into this logbook what the other one has and this one lacks.
    Rows already here (same key) are kept as they are; a tube recorded with a
    different type or owner on the other bench is reported, not changed.
    The other database is brought to this schema on a temporary copy first,
    so it is never modified."""
    other = _check_other(store, Path(other))
    with tempfile.TemporaryDirectory() as d:
        copy = Path(d) / "other.db"
        _copy_logbook(other, copy)
        try:
            Store(copy).close()  # migrates the copy; refuses a newer schema
        except StoreError as e:  # said of the user's file, not of the copy
            raise GlowtraceError(str(e).replace(str(copy), str(other))) from None
        conn = store.db.conn
        conn.execute("ATTACH DATABASE ? AS other", [str(copy)])
        try:
            conflicts = [dict(zip(("tube", "here", "there"), r)) for r in conn.execute(
                "SELECT t.label, t.type || ' / ' || coalesce(t.owner, '-'), "
                "o.type || ' / ' || coalesce(o.owner, '-') FROM main.tubes t "
                "JOIN other.tubes o ON o.label = t.label "
                "WHERE coalesce(t.type, '') != coalesce(o.type, '') "
                "OR coalesce(t.owner, '') != coalesce(o.owner, '')").fetchall()]
            added = {}
            with store.transaction():
                for table, key in _MERGE:
                    cols = [r[1] for r in conn.execute(f"PRAGMA main.table_info({table})")]
                    match = " AND ".join(f"m.{k} = o.{k}" for k in key)
                    sql = (f"INSERT INTO main.{table} ({', '.join(cols)}) "
                           f"SELECT {', '.join('o.' + c for c in cols)} FROM other.{table} o "
                           f"WHERE NOT EXISTS (SELECT 1 FROM main.{table} m WHERE {match})")
                    added[table] = conn.execute(sql).rowcount
        finally:
            conn.execute("DETACH DATABASE other")
    return {"added": added, "conflicts": conflicts}
