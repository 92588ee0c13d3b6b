"""Owners (a shop's customers) and tubes: the records captures belong to.

A tube is known by the user's own label (what is written on it or its box),
has a type from the catalogue, perhaps an owner, notes, and sections: A and B
for a centre-tapped heater, A alone otherwise. Deleting never leaves orphans:
a tube goes with its captures and analyses; an owner only without tubes."""

import difflib
import json
import sqlite3
from datetime import datetime, timezone

from .. import catalogue
from ..errors import GlowtraceError
from .store import Store


class RecordError(GlowtraceError):
    pass


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def sections_of(type_name: str | None) -> tuple[str, ...]:
    if not type_name:
        return ("A", "B")
    try:
        t = catalogue.load().get(type_name)
    except catalogue.UnknownType:
        return ("A", "B")
    return ("A", "B") if t.centre_tapped else ("A",)


def _text(text: str, what: str) -> str:
    """A label or a name as typed, trimmed: 1 to 80 printable characters.
    Path separators are allowed ("KS/0117" is a fine label): where a file is
    named after a label, outfile.safe_name makes it a plain file name."""
    text = (text or "").strip()
    if not text or len(text) > 80:
        raise RecordError(f"{what} must be 1 to 80 characters")
    if not text.isprintable():
        raise RecordError(f"{what} {text!r} holds a control character (a tab, a new line?)")
    return text


def _label(label: str) -> str:
    return _text(label, "a tube label")


# owners -------------------------------------------------------------------
def add_owner(store: Store, name: str, contact: str | None = None,
              notes: str | None = None) -> dict:
    name = _text(name, "an owner's name")
    if get_owner(store, name):
        raise RecordError(f"owner {name!r} exists already")
    row = {"name": name, "contact": contact, "notes": notes, "created_at": _now()}
    with store.transaction() as conn:
        conn.execute("INSERT INTO owners (name, contact, notes, created_at) VALUES (?,?,?,?)",
                     list(row.values()))
    return row


def get_owner(store: Store, name: str) -> dict | None:
    """The owner of that name, matched without regard to case ("orla venn"
    finds "Orla Venn"); the exact spelling first, should two differ by case."""
    rows = list(store.db["owners"].rows_where("name = ?", [name]))
    if rows:
        return rows[0]
    key = name.strip().casefold()
    rows = [r for r in store.db["owners"].rows if r["name"].casefold() == key]
    return rows[0] if rows else None


def require_owner(store: Store, name: str) -> dict:
    o = get_owner(store, name)
    if o is None:
        known = [r["name"] for r in store.db["owners"].rows]
        close = difflib.get_close_matches(name.casefold(), [k.casefold() for k in known], n=3,
                                          cutoff=0.5)
        hint = ("; did you mean " + " or ".join(
            repr(k) for k in known if k.casefold() in close) + "?") if close else ""
        raise RecordError(f"no owner or lot matches {name!r}{hint} "
                          "(`glowtrace owner list` shows them; `glowtrace owner add` adds one)")
    return o


def list_owners(store: Store) -> list[dict]:
    return _rows(store, "SELECT o.name, o.contact, o.notes, count(t.label) AS tubes "
                        "FROM owners o LEFT JOIN tubes t ON t.owner = o.name "
                        "GROUP BY o.name ORDER BY o.name")


def _rows(store: Store, sql: str, args=()) -> list[dict]:
    cur = store.db.execute(sql, list(args))
    cols = [d[0] for d in cur.description]
    return [dict(zip(cols, r)) for r in cur.fetchall()]


def rename_owner(store: Store, old: str, new: str) -> None:
    old = require_owner(store, old)["name"]
    new = _text(new, "an owner's name")
    other = get_owner(store, new)
    if other and other["name"] != old:
        raise RecordError(f"owner {new!r} exists already")
    with store.transaction() as conn:
        conn.execute("PRAGMA defer_foreign_keys = ON")
        conn.execute("UPDATE owners SET name = ? WHERE name = ?", [new, old])
        conn.execute("UPDATE tubes SET owner = ? WHERE owner = ?", [new, old])


def delete_owner(store: Store, name: str) -> None:
    name = require_owner(store, name)["name"]
    n = store.db.execute("SELECT count(*) FROM tubes WHERE owner = ?", [name]).fetchone()[0]
    if n:
        raise RecordError(f"{name!r} still owns {n} tube(s): move them (`glowtrace tube move`) "
                          "or delete them first")
    with store.transaction() as conn:
        conn.execute("DELETE FROM owners WHERE name = ?", [name])


# tubes --------------------------------------------------------------------
def get_tube(store: Store, label: str) -> dict | None:
    rows = _rows(store, "SELECT label, type, owner, notes, created_at FROM tubes "
                        "WHERE label = ?", [label])
    if not rows:
        return None
    t = rows[0]
    t["sections"] = list(sections_of(t["type"]))
    return t


def require_tube(store: Store, label: str) -> dict:
    t = get_tube(store, label)
    if t is None:
        raise RecordError(f"no tube {label!r} in {store.path}")
    return t


def add_tube(store: Store, label: str, type_name: str | None, owner: str | None = None,
             notes: str | None = None) -> dict:
    label = _label(label)
    if get_tube(store, label):
        raise RecordError(f"tube {label!r} exists already")
    if type_name:
        type_name = catalogue.load().get(type_name).name
    if owner:
        owner = require_owner(store, owner)["name"]
    with store.transaction() as conn:
        conn.execute("INSERT INTO tubes (label, type, notes, created_at, owner) "
                     "VALUES (?,?,?,?,?)", [label, type_name, notes, _now(), owner])
    return get_tube(store, label)


def ensure_tube(store: Store, label: str, type_name: str | None) -> dict:
    """The tube, created with this type if new; a type that contradicts the
    stored one is an error."""
    t = get_tube(store, label)
    if t is None:
        return add_tube(store, label, type_name)
    if type_name:
        want = catalogue.load().get(type_name).name
        if t["type"] and t["type"] != want:
            raise RecordError(f"tube {label!r} is recorded as a {t['type']}, not a {want}")
        if not t["type"]:
            with store.transaction() as conn:
                conn.execute("UPDATE tubes SET type = ? WHERE label = ?", [want, label])
            t["type"] = want
            t["sections"] = list(sections_of(want))
    return t


def list_tubes(store: Store, owner: str | None = None, type_name: str | None = None) -> list:
    where, args = [], []
    if owner:
        where.append("t.owner = ?")
        args.append(require_owner(store, owner)["name"])
    if type_name:
        where.append("t.type = ?")
        args.append(catalogue.load().get(type_name).name)
    sql = ("SELECT t.label, t.type, t.owner, t.notes, count(c.uuid) AS captures, "
           "max(c.started_at) AS last_capture FROM tubes t "
           "LEFT JOIN captures c ON c.tube = t.label"
           + (" WHERE " + " AND ".join(where) if where else "")
           + " GROUP BY t.label ORDER BY t.label")
    return _rows(store, sql, args)


def update_tube(store: Store, label: str, notes: str | None = None,
                type_name: str | None = None) -> dict:
    require_tube(store, label)
    with store.transaction() as conn:
        if notes is not None:
            conn.execute("UPDATE tubes SET notes = ? WHERE label = ?", [notes, label])
        if type_name is not None:
            conn.execute("UPDATE tubes SET type = ? WHERE label = ?",
                         [catalogue.load().get(type_name).name, label])
    return get_tube(store, label)


def rename_tube(store: Store, old: str, new: str) -> None:
    require_tube(store, old)
    new = _label(new)
    if get_tube(store, new):
        raise RecordError(f"tube {new!r} exists already")
    with store.transaction() as conn:
        conn.execute("PRAGMA defer_foreign_keys = ON")
        for table, col in (("tubes", "label"), ("captures", "tube"),
                           ("section_metrics", "tube"), ("baselines", "tube")):
            conn.execute(f"UPDATE {table} SET {col} = ? WHERE {col} = ?", [new, old])


def move_tube(store: Store, label: str, owner: str | None) -> None:
    require_tube(store, label)
    if owner:
        owner = require_owner(store, owner)["name"]
    with store.transaction() as conn:
        conn.execute("UPDATE tubes SET owner = ? WHERE label = ?", [owner, label])


def delete_tube(store: Store, label: str) -> int:
    """Delete a tube with everything recorded of it; returns captures removed."""
    require_tube(store, label)
    uuids = [r[0] for r in store.db.execute("SELECT uuid FROM captures WHERE tube = ?",
                                            [label]).fetchall()]
    try:
        with store.transaction() as conn:
            for u in uuids:
                for table in ("section_metrics", "analyses", "capture_samples"):
                    conn.execute(f"DELETE FROM {table} WHERE capture_uuid = ?", [u])
            conn.execute("DELETE FROM captures WHERE tube = ?", [label])
            conn.execute("DELETE FROM baselines WHERE tube = ?", [label])
            conn.execute("DELETE FROM tubes WHERE label = ?", [label])
    except sqlite3.DatabaseError as e:
        raise RecordError(f"tube {label!r} not deleted: {e}") from None
    return len(uuids)


def check_capture_target(store: Store | None, label: str, type_name: str | None,
                         section: str) -> str | None:
    """Before switching anything on: the tube's type (given or recorded) must
    agree, and have the sections asked for. Returns the type to use."""
    _label(label)
    t = get_tube(store, label) if store is not None else None
    if t and type_name and t["type"] and t["type"] != type_name:
        raise RecordError(f"tube {label!r} is recorded as a {t['type']}, not a {type_name}")
    kind = type_name or (t["type"] if t else None)
    if kind:
        have = sections_of(kind)
        missing = [s for s in section if s not in have]
        if missing:
            raise RecordError(f"type {kind} has section(s) {', '.join(have)} only: "
                              f"there is no section {', '.join(missing)} to switch on")
    return kind


def count_captures(store: Store, label: str) -> int:
    return store.db.execute("SELECT count(*) FROM captures WHERE tube = ?",
                            [require_tube(store, label)["label"]]).fetchone()[0]


def set_baseline(store: Store, label: str, section: str, captures: list[str] | None,
                 clear: bool = False) -> dict:
    """The captures a section is judged against (by UUID or prefix), or back
    to its first good captures with clear."""
    t = require_tube(store, label)
    if section not in t["sections"]:
        raise RecordError(f"{t['label']} has section(s) {', '.join(t['sections'])}")
    if clear:
        with store.transaction() as conn:
            conn.execute("DELETE FROM baselines WHERE tube = ? AND section = ?",
                         [t["label"], section])
        return {"tube": t["label"], "section": section, "baseline": "first good captures"}
    if not captures:
        raise RecordError("give --captures UUID... or --clear")
    uuids = []
    for u in captures:
        full = store.find_uuid(u)
        row = store.db.execute("SELECT tube, section FROM captures WHERE uuid = ?",
                               [full]).fetchone()
        if row[0] != t["label"] or section not in row[1]:
            raise RecordError(f"capture {u} is not of {t['label']} section {section}")
        uuids.append(full)
    with store.transaction() as conn:
        conn.execute("DELETE FROM baselines WHERE tube = ? AND section = ?",
                     [t["label"], section])
        conn.execute("INSERT INTO baselines (tube, section, captures, set_at) VALUES (?,?,?,?)",
                     [t["label"], section, json.dumps(uuids), _now()])
    return {"tube": t["label"], "section": section, "baseline": uuids}
