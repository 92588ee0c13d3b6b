"""Moving logbooks between benches: a whole-database export, a merge of
another bench's database by capture UUID (nothing twice), and the stock list
dealers hand on (CSV, JSON)."""

import csv
import shutil
import sqlite3
import tempfile
from pathlib import Path

from .errors import GlowtraceError
from .store import Store


def export_db(store: Store, path: str | Path) -> int:
    """A consistent copy of the whole logbook (VACUUM INTO); returns bytes."""
    path = Path(path)
    if path.exists():
        raise GlowtraceError(f"{path} exists: choose a new file name")
    try:
        store.db.execute("VACUUM INTO ?", [str(path)])
    except sqlite3.DatabaseError as e:
        raise GlowtraceError(f"export to {path} failed: {e}") from None
    return path.stat().st_size


# tables in dependency order, with the key that identifies a row across benches
_MERGE = [("owners", ("name",)), ("tubes", ("label",)), ("captures", ("uuid",)),
          ("capture_samples", ("capture_uuid",)), ("analyses", ("capture_uuid", "version")),
          ("section_metrics", ("capture_uuid", "section", "version")),
          ("baselines", ("tube", "section"))]


def merge_db(store: Store, other: str | Path) -> dict:
    """Copy into this logbook what the other one has and this one lacks.
    Rows already here (same key) are kept as they are; a tube recorded with a
    different type or owner on the other bench is reported, not changed.
    The other database is brought to this schema on a temporary copy first,
    so it is never modified."""
    other = Path(other)
    if not other.exists():
        raise GlowtraceError(f"no database at {other}")
    with tempfile.TemporaryDirectory() as d:
        copy = Path(d) / "other.db"
        shutil.copyfile(other, copy)
        Store(copy).close()  # migrates the copy; refuses a newer schema
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


STOCK_FIELDS = ["tube", "type", "owner", "status", "grade", "sections", "hot_current_a",
                "rated_amps", "current_deviation", "cold_resistance_20c_ohm", "flash_index",
                "section_imbalance", "drifting", "reasons"]


def stock_rows(assessments: list[dict]) -> list[dict]:
    rows = []
    for a in assessments:
        secs = a["sections"]
        at = a["against_type"]

        def per(metric):
            vals = {s: v["metrics"].get(metric, {}).get("latest") for s, v in secs.items()}
            return {s: v for s, v in vals.items() if v is not None}
        rows.append({
            "tube": a["tube"], "type": a["type"], "owner": a["owner"], "status": a["status"],
            "grade": a["grade"], "sections": "".join(secs),
            "hot_current_a": per("hot_current_a"), "rated_amps": at["rated_amps"],
            "current_deviation": at["current_deviation"],
            "cold_resistance_20c_ohm": per("cold_resistance_20c_ohm"),
            "flash_index": per("flash_index"), "section_imbalance": at["section_imbalance"],
            "drifting": a["drifting"], "reasons": a["reasons"]})
    return rows


def write_stock_csv(rows: list[dict], path: str | Path) -> None:
    """One line per tube section, flat columns for a spreadsheet."""
    with open(path, "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["tube", "type", "owner", "section", "status", "grade", "hot_current_a",
                    "rated_amps", "current_deviation", "cold_resistance_20c_ohm",
                    "flash_index", "section_imbalance", "drifting", "reasons"])
        for r in rows:
            for sec in r["sections"] or "-":
                w.writerow([r["tube"], r["type"] or "", r["owner"] or "", sec, r["status"],
                            r["grade"] or "", _g(r["hot_current_a"].get(sec)),
                            _g(r["rated_amps"]), _g(r["current_deviation"].get(sec)),
                            _g(r["cold_resistance_20c_ohm"].get(sec)),
                            _g(r["flash_index"].get(sec)), _g(r["section_imbalance"]),
                            int(r["drifting"]), " | ".join(r["reasons"])])


def _g(v) -> str:
    return "" if v is None else f"{v:.6g}"
