"""The SQLite logbook: schema with recorded migrations, captures keyed by
UUID, raw samples kept losslessly with the timing, front end and calibration
they were taken with. A capture is written in one transaction: it is there
whole or not at all."""

import hashlib
import json
import os
import sqlite3
import tempfile
import time
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path


import sqlite_utils

from . import floatrows, samples_codec
from ..tester.raw import RawCapture
from ..errors import StoreError


IMPORT_ENCODING = "float64-columns-lzma-v1"


def version_key(version: str) -> tuple:
    """Analysis versions compare by their numbers ("1.10" after "1.9"), not
    as text; anything that is not dotted numbers sorts before them."""
    try:
        return (1, tuple(int(p) for p in str(version).split(".")))
    except ValueError:
        return (0, (), str(version))


def _version_cmp(a: str, b: str) -> int:
    ka, kb = version_key(a), version_key(b)
    return (ka > kb) - (ka < kb)


def _now() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="seconds")


def _m1_initial(db: sqlite_utils.Database) -> None:
    db["tubes"].create({"label": str, "type": str, "notes": str, "created_at": str},
                       pk="label")
    db["captures"].create({
        "uuid": str, "tube": str, "section": str, "started_at": str, "stored_at": str,
        "complete": int, "incomplete_reason": str, "end_reason": str, "trip_cause": str,
        "board_id": str, "firmware": str, "port": str, "ambient_c": float,
        "n_sets": int, "n_blocks": int, "params": str, "hello": str, "phases": str,
        "end_record": str, "trip_record": str, "link": str,
    }, pk="uuid", foreign_keys=[("tube", "tubes", "label")])
    db["captures"].create_index(["tube", "section", "started_at"])
    db["capture_samples"].create({
        "capture_uuid": str, "encoding": str, "channels": str, "n_sets": int,
        "blocks": bytes, "samples": bytes,
    }, pk="capture_uuid", foreign_keys=[("capture_uuid", "captures", "uuid")])


def _m2_analyses(db: sqlite_utils.Database) -> None:
    # one row per capture and analysis version: re-running a newer analysis
    # adds a row, older results stay for comparison
    db["analyses"].create({"capture_uuid": str, "version": str, "created_at": str,
                           "result": str}, pk=("capture_uuid", "version"),
                          foreign_keys=[("capture_uuid", "captures", "uuid")])


METRIC_COLUMNS = ("cold_resistance_20c_ohm", "hot_current_a", "hot_resistance_ohm",
                  "inrush_ratio", "inrush_20c", "warmup_90_s", "settle_1pct_s", "flash_index")
# schema 5: the figures at rated conditions that scoring reads (analysis 2.0)
RATED_COLUMNS = ("rated_hot_current_a", "rated_inrush_ratio", "rated_warmup_90_s",
                 "rated_settle_1pct_s", "series_warmup_s")
# warnings that keep a capture out of history scoring (it is still shown)
SERIOUS = ("open heater", "shorted", "clipped", "too short", "not analysed",
           "no resistance rise", "not a cold start", "incomplete", "no samples",
           "too far from its rated", "intermittent contact")


def _m3_records(db: sqlite_utils.Database) -> None:
    db["owners"].create({"name": str, "contact": str, "notes": str, "created_at": str},
                        pk="name")
    db.execute("ALTER TABLE tubes ADD COLUMN owner TEXT REFERENCES owners(name)")
    db.execute("ALTER TABLE captures ADD COLUMN source TEXT NOT NULL DEFAULT 'tester'")
    # one row per capture, section and analysis version: what history scoring
    # reads, as columns, so a fleet is scored without parsing JSON
    cols = {"capture_uuid": str, "section": str, "version": str, "tube": str, "at": str,
            "ambient_c": float, "cold_start_ok": int, "scored": int, "excluded": str}
    cols.update({c: float for c in METRIC_COLUMNS})
    db["section_metrics"].create(cols, pk=("capture_uuid", "section", "version"),
                                 foreign_keys=[("capture_uuid", "captures", "uuid")])
    db["section_metrics"].create_index(["tube", "section", "version", "at"])
    db["baselines"].create({"tube": str, "section": str, "captures": str, "set_at": str},
                           pk=("tube", "section"), foreign_keys=[("tube", "tubes", "label")])
    rows = db.execute("SELECT a.capture_uuid, a.version, a.result, c.tube, c.started_at, "
                      "c.complete FROM analyses a JOIN captures c ON c.uuid = a.capture_uuid"
                      ).fetchall()
    for uuid, version, result, tube, at, complete in rows:
        for row in metric_rows(uuid, version, json.loads(result), tube, at, bool(complete)):
            # the columns of schema 3 only: later migrations add the rest
            _insert(db.conn, "section_metrics",
                    {k: v for k, v in row.items() if k not in RATED_COLUMNS})


def metric_rows(uuid: str, version: str, result: dict, tube: str | None, at: str,
                complete: bool) -> list[dict]:
    """section_metrics rows of one analysis; `excluded` says why a row is
    left out of history scoring."""
    out = []
    general = " ".join(result.get("warnings", []))
    for sec, m in result.get("sections", {}).items():
        why = [w for w in m.get("warnings", []) + ([general] if general else [])
               if any(s in w for s in SERIOUS)]
        if m.get("not_judged"):  # cut short by the other section's trip, or the range's
            why = [f"not judged: {m['not_judged']}"]
        elif m.get("heater_fault"):
            why = [f"heater fault: {w}" for w in m.get("warnings", [])] or ["heater fault"]
        if not complete:
            why.append("capture incomplete")
        if (not m.get("cold_start_ok") and not m.get("not_judged") and not m.get("heater_fault")
                and not any("cold start" in w for w in why)):
            why.append("not a cold start")
        row = {"capture_uuid": uuid, "section": sec, "version": version, "tube": tube,
               "at": at, "ambient_c": m.get("ambient_c"),
               "cold_start_ok": int(bool(m.get("cold_start_ok"))),
               "scored": int(not why), "excluded": "; ".join(dict.fromkeys(why)) or None}
        row.update({c: m.get(c) for c in METRIC_COLUMNS + RATED_COLUMNS})
        # the inrush the tube would show at 20 C: room temperature changes the
        # cold resistance, and with it the inrush, but not the tube
        if m.get("inrush_ratio") and m.get("cold_resistance_20c_ohm"):
            row["inrush_20c"] = (m["inrush_ratio"] * m["cold_resistance_ohm"]
                                 / m["cold_resistance_20c_ohm"])
        out.append(row)
    return out


def _m4_calibrations(db: sqlite_utils.Database) -> None:
    db["calibrations"].create({"id": int, "board": str, "at": str, "data": str}, pk="id")
    db["calibrations"].create_index(["board", "at"])


def _m5_rated_figures(db: sqlite_utils.Database) -> None:
    # analyses before 2.0 have no rated figures: their columns stay empty
    # until `glowtrace reanalyze` (scoring says so)
    for c in RATED_COLUMNS:
        db.execute(f"ALTER TABLE section_metrics ADD COLUMN {c} REAL")


def _m6_scoring_keys(db: sqlite_utils.Database) -> None:
    """What scoring a fleet needs kept by the logbook itself, so no query
    has to find the newest analysis or rescan a type:
      - section_metrics.current: 1 on the newest analysis version of each
        capture section (kept by triggers, whoever writes the rows);
      - logbook_generation: a counter every change to section_metrics or
        tubes moves on (triggers), the key of scoring_cache;
      - scoring_cache: per type, its population and pooled noise, valid
        while the generation it was computed at is current."""
    db.execute("ALTER TABLE section_metrics ADD COLUMN current INTEGER NOT NULL DEFAULT 0")
    db.execute(_MARK_CURRENT.format(where=""))
    db["section_metrics"].create_index(["current", "tube", "section", "at"])
    db.execute("CREATE TABLE logbook_generation (n INTEGER NOT NULL)")
    db.execute("INSERT INTO logbook_generation VALUES (0)")
    db["scoring_cache"].create({"type": str, "version": str, "generation": int, "noise": str,
                                "population": bytes}, pk=("type", "version"))
    newest = ("UPDATE section_metrics SET current = (version = (SELECT max(version COLLATE "
              "analysis_version) FROM section_metrics x WHERE x.capture_uuid = {r}.capture_uuid "
              "AND x.section = {r}.section)) WHERE capture_uuid = {r}.capture_uuid "
              "AND section = {r}.section;")
    bump = "UPDATE logbook_generation SET n = n + 1;"
    for name, when, body in (
            ("sm_inserted", "AFTER INSERT ON section_metrics", newest.format(r="NEW") + bump),
            ("sm_deleted", "AFTER DELETE ON section_metrics", newest.format(r="OLD") + bump),
            ("sm_updated", "AFTER UPDATE OF version, scored, tube, at ON section_metrics", bump),
            ("tubes_changed", "AFTER UPDATE OF type, label ON tubes", bump),
            ("tubes_inserted", "AFTER INSERT ON tubes", bump),
            ("tubes_deleted", "AFTER DELETE ON tubes", bump)):
        db.execute(f"CREATE TRIGGER {name} {when} BEGIN {body} END")


def _m7_tester_records(db: sqlite_utils.Database) -> None:
    """A tester's HELLO (its front end, ranges and calibration, about 2 kB)
    kept once per distinct record, keyed by its SHA-256, instead of in every
    capture row; the rows of tester captures move there."""
    db["tester_records"].create({"hash": str, "hello": str}, pk="hash")
    db.execute("ALTER TABLE captures ADD COLUMN hello_hash TEXT REFERENCES tester_records(hash)")
    rows = db.execute("SELECT uuid, hello FROM captures WHERE source = 'tester' "
                      "AND hello IS NOT NULL").fetchall()
    for uuid, text in rows:
        h, own = _keep_hello(db.conn, json.loads(text))
        db.execute("UPDATE captures SET hello_hash = ?, hello = ? WHERE uuid = ?",
                   [h, own, uuid])


# what a HELLO says of this connection, not of the board: kept in the capture row
HELLO_OF_THE_MOMENT = ("boot", "reset_cause")


def _keep_hello(conn, hello: dict) -> tuple[str, str]:
    """(the board's record's key, after storing it if it is new; the JSON of
    what the HELLO says of this moment only, for the capture's row)."""
    board = {k: v for k, v in hello.items() if k not in HELLO_OF_THE_MOMENT}
    text = json.dumps(board, sort_keys=True)
    h = hashlib.sha256(text.encode()).hexdigest()
    conn.execute("INSERT OR IGNORE INTO tester_records (hash, hello) VALUES (?, ?)", [h, text])
    return h, json.dumps({k: hello[k] for k in HELLO_OF_THE_MOMENT if k in hello})


_MARK_CURRENT = """UPDATE section_metrics SET current = (version = (
    SELECT max(version COLLATE analysis_version) FROM section_metrics x
    WHERE x.capture_uuid = section_metrics.capture_uuid AND x.section = section_metrics.section))
    {where}"""


# (version, name, function). Append only: never edit a released migration.
MIGRATIONS = [
    (1, "initial: tubes, captures, capture_samples", _m1_initial),
    (2, "analyses of captures, per analysis version", _m2_analyses),
    (3, "owners, capture source, section metrics, baselines", _m3_records),
    (4, "calibrations of testers", _m4_calibrations),
    (5, "figures at rated conditions in section metrics", _m5_rated_figures),
    (6, "current analysis flag, logbook generation, scoring cache", _m6_scoring_keys),
    (7, "tester records kept once, referenced from captures", _m7_tester_records),
]
LATEST = MIGRATIONS[-1][0]


def _insert(conn, table: str, row: dict) -> None:
    # plain SQL: sqlite-utils' insert commits by itself, which would split the
    # one transaction a capture is written in
    cols = ", ".join(row)
    marks = ", ".join("?" for _ in row)
    conn.execute(f"INSERT INTO [{table}] ({cols}) VALUES ({marks})", list(row.values()))


class StoreBusy(StoreError):
    """The logbook stayed locked by another program past the wait allowed."""


BUSY_POLL_S = 0.5  # how often a waiting write tries again (and says so)


class Store:
    def __init__(self, path: str | Path, create: bool = True, timeout: float = 5.0):
        self.path = Path(path)
        if self.path.is_dir():
            raise StoreError(f"{self.path} is a directory, not a logbook: give a file name")
        if not create and not self.path.exists():
            raise StoreError(f"no database at {self.path}")
        if self.path.exists() and self.path.stat().st_size == 0:
            # SQLite would quietly make any empty file a logbook
            raise StoreError(f"{self.path} is an empty file, not a glowtrace logbook: "
                             "remove it or give another --db")
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as e:
            raise StoreError(f"cannot make the folder for the logbook {self.path}: "
                             f"{e.strerror}") from None
        self.timeout = timeout
        try:
            # autocommit mode: transactions are opened and closed explicitly
            conn = sqlite3.connect(self.path, timeout=timeout, isolation_level=None)
            conn.execute("PRAGMA foreign_keys = ON")
            self._journal(conn)
            # `COLLATE analysis_version` wherever the newest analysis is chosen
            conn.create_collation("analysis_version", _version_cmp)
            self.db = sqlite_utils.Database(conn)
            self._refuse_foreign()
            self._migrate()
        except sqlite3.DatabaseError as e:
            raise self._error("cannot use database", e) from None

    def _journal(self, conn) -> None:
        """Write-ahead log with synchronous=NORMAL: a commit is one write to
        the log, without waiting for the disk, and still atomic (a crashed
        program leaves each capture whole or absent; a power cut may lose the
        last commits, never corrupt). A logbook in a folder we cannot write
        keeps its journal as it is: WAL needs files beside it."""
        if not os.access(self.path.parent, os.W_OK) or (
                self.path.exists() and not os.access(self.path, os.W_OK)):
            return
        conn.execute("PRAGMA journal_mode = WAL")
        conn.execute("PRAGMA synchronous = NORMAL")

    def _refuse_foreign(self) -> None:
        """Another program's SQLite file is not made into a logbook."""
        names = set(self.db.table_names())
        if names and "schema_migrations" not in names:
            raise StoreError(f"{self.path} is an SQLite database of another program, not a "
                             "glowtrace logbook: it was left untouched")

    def _error(self, what: str, e: Exception) -> StoreError:
        text = str(e)
        if "locked" in text or "busy" in text:
            return StoreBusy(f"{what} {self.path}: it is locked by another program "
                             "(is another glowtrace writing to it?)")
        if "readonly" in text or "read-only" in text:
            return StoreError(f"{what} {self.path}: the logbook is read-only (check the "
                              "file's and its folder's permissions)")
        return StoreError(f"{what} {self.path}: {e}")

    def check_writable(self) -> None:
        """Refuse a logbook that cannot take a capture, before the heater is
        switched on (a busy one is fine: the capture waits for it)."""
        for p, what in ((self.path, "the logbook"), (self.path.parent, "its folder")):
            if not os.access(p, os.W_OK):
                raise StoreError(f"cannot write to the logbook {self.path}: {what} is "
                                 "read-only (check its permissions, or give another --db)")

    @contextmanager
    def transaction(self):
        """All or nothing: BEGIN IMMEDIATE ... COMMIT, ROLLBACK on any error
        (a failed COMMIT too, so no lock is left behind)."""
        conn = self.db.conn
        self.check_writable()  # SQLite would open it read-only and fail late
        try:
            conn.execute("BEGIN IMMEDIATE")
        except sqlite3.DatabaseError as e:
            raise self._error("cannot write to", e) from None
        try:
            yield conn
            conn.execute("COMMIT")
        except BaseException as e:
            if conn.in_transaction:
                conn.execute("ROLLBACK")
            if isinstance(e, sqlite3.DatabaseError):
                raise self._error("cannot write to", e) from None
            raise

    @contextmanager
    def snapshot(self):
        """Reads that must see one state of the logbook (a deferred
        transaction: other programs may write meanwhile, unseen here)."""
        conn = self.db.conn
        conn.execute("BEGIN")
        try:
            yield conn
        finally:
            conn.execute("COMMIT")

    # scoring cache (migration 6) -----------------------------------------
    def generation(self) -> int:
        """Moves on with every change to what scoring reads."""
        return self.db.execute("SELECT n FROM logbook_generation").fetchone()[0]

    def scoring_cache(self, type_name: str, version: str) -> tuple[str, bytes] | None:
        """(noise, population) kept for a type, if the logbook has not
        changed since."""
        row = self.db.execute(
            "SELECT noise, population FROM scoring_cache c, logbook_generation g "
            "WHERE c.type = ? AND c.version = ? AND c.generation = g.n",
            [type_name, version]).fetchone()
        return (row[0], row[1]) if row else None

    def keep_scoring_cache(self, type_name: str, version: str, generation: int, noise: str,
                           population: bytes) -> None:
        """Best effort, never waiting: a read-only or busy logbook is scored
        again next time."""
        self.db.conn.execute("PRAGMA busy_timeout = 0")
        try:
            with self.transaction() as conn:
                conn.execute("INSERT OR REPLACE INTO scoring_cache VALUES (?, ?, ?, ?, ?)",
                             [type_name, version, generation, noise, population])
        except StoreError:
            pass
        finally:
            self.db.conn.execute(f"PRAGMA busy_timeout = {int(self.timeout * 1000)}")

    def write_waiting(self, write, wait_s: float, on_busy=None):
        """Run write() (one transaction) and, while another program holds the
        logbook, try again every BUSY_POLL_S until wait_s has passed; raise
        StoreBusy after that. on_busy(waited_s) is told at every try."""
        start = time.monotonic()
        self.db.conn.execute(f"PRAGMA busy_timeout = {int(BUSY_POLL_S * 1000)}")
        try:
            while True:
                try:
                    return write()
                except StoreBusy:
                    waited = time.monotonic() - start
                    if waited >= wait_s:
                        raise
                    if on_busy:
                        on_busy(waited)
        finally:
            self.db.conn.execute(f"PRAGMA busy_timeout = {int(self.timeout * 1000)}")

    def close(self) -> None:
        self.db.conn.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()

    # schema --------------------------------------------------------------
    def schema_version(self) -> int:
        if "schema_migrations" not in self.db.table_names():
            return 0
        row = self.db.execute("SELECT max(version) FROM schema_migrations").fetchone()
        return row[0] or 0

    def _migrate(self) -> None:
        current = self.schema_version()
        if current > LATEST:
            raise StoreError(
                f"{self.path} was written by a newer glowtrace (schema {current}, "
                f"this version knows up to {LATEST}): upgrade glowtrace")
        for version, name, fn in MIGRATIONS:
            if version <= current:
                continue
            with self.transaction() as conn:
                if "schema_migrations" not in self.db.table_names():
                    self.db["schema_migrations"].create(
                        {"version": int, "name": str, "applied_at": str}, pk="version")
                fn(self.db)
                _insert(conn, "schema_migrations",
                        {"version": version, "name": name, "applied_at": _now()})

    # captures ------------------------------------------------------------
    def save_capture(self, raw: RawCapture, tube_type: str | None = None,
                     notes: str | None = None, wait_s: float = 0.0, on_busy=None) -> str:
        """Store a capture whole, in one short transaction (the samples are
        packed before it); wait up to wait_s for a busy logbook."""
        meta_blob, samples_blob = samples_codec.encode(raw.blocks)
        row = {
            "uuid": raw.uuid, "tube": raw.tube, "section": raw.section,
            "started_at": raw.started_at, "stored_at": _now(),
            "complete": int(raw.complete), "incomplete_reason": raw.incomplete_reason,
            "end_reason": raw.end_reason, "trip_cause": raw.trip_cause,
            "board_id": raw.hello.get("board"), "firmware": raw.hello.get("firmware"),
            "port": raw.port, "ambient_c": raw.ambient_c, "n_sets": raw.n_sets,
            "n_blocks": len(raw.blocks), "params": json.dumps(raw.params),
            "hello": None, "phases": json.dumps(raw.phases),
            "end_record": json.dumps(raw.end), "trip_record": json.dumps(raw.trip),
            "link": json.dumps(raw.link),
        }

        def write():
            with self.transaction() as conn:  # the capture is whole or absent
                if raw.tube is not None and not self.db["tubes"].count_where(
                        "label = ?", [raw.tube]):
                    _insert(conn, "tubes", {"label": raw.tube, "type": tube_type,
                                            "notes": notes, "created_at": _now()})
                row["hello_hash"], row["hello"] = _keep_hello(conn, raw.hello)
                _insert(conn, "captures", row)
                _insert(conn, "capture_samples", {
                    "capture_uuid": raw.uuid, "encoding": samples_codec.ENCODING,
                    "channels": json.dumps(raw.channels), "n_sets": raw.n_sets,
                    "blocks": meta_blob, "samples": samples_blob})
        try:
            self.write_waiting(write, wait_s, on_busy)
        except StoreError as e:
            raise type(e)(f"capture {raw.uuid} not stored: {e}") from None
        except sqlite3.DatabaseError as e:
            raise self._error(f"capture {raw.uuid} not stored in", e) from None
        return raw.uuid

    def save_imported(self, uuid: str, tube: str, section: str, started_at: str,
                      ambient_c: float, spool, names: list, n_rows: int,
                      source_name: str) -> str:
        """A curve recorded by another instrument, kept exactly as read:
        `spool` is a binary file of float64 rows (columns `names`: time_s,
        volts, amps and optionally light). It is packed (LZMA) into another
        temporary file before the transaction, and written into the logbook
        a chunk at a time: a short transaction in bounded memory."""
        row = {"uuid": uuid, "tube": tube, "section": section, "started_at": started_at,
               "stored_at": _now(), "complete": 1, "incomplete_reason": None,
               "end_reason": "imported", "trip_cause": None, "board_id": None,
               "firmware": None, "port": source_name, "ambient_c": ambient_c,
               "n_sets": n_rows, "n_blocks": 0, "params": json.dumps({"section": section}),
               "hello": json.dumps({"source": source_name}), "phases": "[]",
               "end_record": "null", "trip_record": "null", "link": "{}", "source": "import"}
        with tempfile.TemporaryFile() as packed:
            spool.seek(0)
            size = floatrows.compress(spool, packed)  # before the transaction
            packed.seek(0)
            with self.transaction() as conn:
                _insert(conn, "captures", row)
                cur = conn.execute(
                    "INSERT INTO capture_samples (capture_uuid, encoding, channels, n_sets, "
                    "blocks, samples) VALUES (?, ?, ?, ?, ?, zeroblob(?))",
                    [uuid, IMPORT_ENCODING, json.dumps(names), n_rows, b"", size])
                with conn.blobopen("capture_samples", "samples", cur.lastrowid) as blob:
                    for chunk in floatrows.read_chunks(packed):
                        blob.write(chunk)
        return uuid

    def capture_source(self, uuid: str) -> str:
        return self.db.execute("SELECT source FROM captures WHERE uuid = ?", [uuid]).fetchone()[0]

    def imported_rows(self, uuid: str):
        """(capture row, column names, row count, an iterator of float64
        row chunks) of an imported curve, read from the logbook a chunk at a
        time."""
        c = self.db["captures"].get(uuid)
        rowid, names, n = self.db.execute(
            "SELECT rowid, channels, n_sets FROM capture_samples WHERE capture_uuid = ?",
            [uuid]).fetchone()
        names = json.loads(names)

        def packed():
            with self.db.conn.blobopen("capture_samples", "samples", rowid,
                                       readonly=True) as blob:
                while chunk := blob.read(1 << 20):
                    yield chunk
        return c, names, n, floatrows.rows_from_bytes(floatrows.decompress(packed()),
                                                      len(names))

    def load_imported(self, uuid: str, max_points: int | None = None) -> tuple[dict, dict]:
        """(capture row, columns by name) of an imported curve: every row, or
        at most max_points means of consecutive rows (floatrows.reduced)."""
        c, names, n, rows = self.imported_rows(uuid)
        data, _ = floatrows.reduced(rows, n, len(names), max_points)
        return c, {name: data[:, k] for k, name in enumerate(names)}

    def find_uuid(self, prefix: str) -> str:
        # a prefix is matched as text: % and _ in it are not wildcards
        rows = self.db.execute(
            "SELECT uuid FROM captures WHERE substr(uuid, 1, length(?)) = ? "
            "ORDER BY uuid LIMIT 2", [prefix, prefix]).fetchall() if prefix else []
        if not rows:
            raise StoreError(f"no capture {prefix!r} in {self.path}")
        if len(rows) > 1:
            raise StoreError(f"{prefix!r} matches more than one capture: give more of the UUID")
        return rows[0][0]

    def load_capture(self, uuid: str) -> RawCapture:
        uuid = self.find_uuid(uuid)
        c = self.db["captures"].get(uuid)
        if c["source"] == "import":
            raise StoreError(f"capture {uuid} is an imported curve, not a tester capture")
        s = self.db["capture_samples"].get(uuid)
        if s["encoding"] not in samples_codec.KNOWN:
            raise StoreError(f"capture {uuid}: unknown sample encoding {s['encoding']}")
        return RawCapture(
            tube=c["tube"], section=c["section"], port=c["port"],
            hello=self._hello(c), params=json.loads(c["params"]),
            channels=json.loads(s["channels"]), ambient_c=c["ambient_c"],
            phases=json.loads(c["phases"]),
            blocks=samples_codec.decode(s["encoding"], s["blocks"], s["samples"]),
            end=json.loads(c["end_record"]), trip=json.loads(c["trip_record"]),
            incomplete_reason=c["incomplete_reason"], link=json.loads(c["link"]),
            started_at=c["started_at"], uuid=c["uuid"])

    def _hello(self, capture: dict) -> dict:
        """The HELLO as received: the board's record, and what was of the moment."""
        own = json.loads(capture["hello"]) if capture["hello"] else {}
        if not capture.get("hello_hash"):  # imported curves keep theirs whole
            return own
        return {**json.loads(self.db["tester_records"].get(capture["hello_hash"])["hello"]),
                **own}

    def list_captures(self, tube: str | None = None) -> list[dict]:
        where, args = ("WHERE c.tube = ?", [tube]) if tube else ("", [])
        sql = f"""SELECT c.uuid, c.tube, t.type, c.section, c.started_at, c.complete,
                  c.incomplete_reason, c.end_reason, c.trip_cause, c.n_sets, c.ambient_c,
                  length(s.samples) + length(s.blocks) AS sample_bytes
                  FROM captures c LEFT JOIN tubes t ON t.label = c.tube
                  LEFT JOIN capture_samples s ON s.capture_uuid = c.uuid
                  {where} ORDER BY c.started_at, c.uuid"""
        cur = self.db.execute(sql, args)
        cols = [d[0] for d in cur.description]
        return [dict(zip(cols, r)) for r in cur.fetchall()]

    # analyses ------------------------------------------------------------
    def save_analysis(self, uuid: str, result: dict) -> None:
        row = {"capture_uuid": uuid, "version": result["analysis_version"],
               "created_at": _now(), "result": json.dumps(result)}
        cap = self.db.execute("SELECT tube, started_at, complete FROM captures WHERE uuid = ?",
                              [uuid]).fetchone()
        try:
            with self.transaction() as conn:
                for table in ("analyses", "section_metrics"):
                    conn.execute(f"DELETE FROM {table} WHERE capture_uuid = ? AND version = ?",
                                 [uuid, row["version"]])
                _insert(conn, "analyses", row)
                for m in metric_rows(uuid, row["version"], result, cap[0], cap[1],
                                     bool(cap[2])):
                    _insert(conn, "section_metrics", m)
        except sqlite3.DatabaseError as e:
            raise self._error(f"analysis of {uuid} not stored in", e) from None

    def analysis(self, uuid: str, version: str | None = None) -> dict | None:
        """The analysis of a capture: of the given version, else the newest."""
        sql = "SELECT result FROM analyses WHERE capture_uuid = ?"
        args = [uuid]
        if version:
            sql += " AND version = ?"
            args.append(version)
        sql += " ORDER BY version COLLATE analysis_version DESC, created_at DESC LIMIT 1"
        row = self.db.execute(sql, args).fetchone()
        return json.loads(row[0]) if row else None

    def uuids_needing_analysis(self, version: str, force: bool = False) -> list[str]:
        sql = "SELECT uuid FROM captures"
        if not force:
            sql += (" WHERE uuid NOT IN (SELECT capture_uuid FROM analyses "
                    "WHERE version = ?)")
        sql += " ORDER BY started_at, uuid"
        return [r[0] for r in self.db.execute(sql, [] if force else [version]).fetchall()]

    def history_cold_r20(self, tube: str, section: str, before: str) -> float | None:
        """Median cold resistance at 20 C of this tube section's earlier cold
        starts (newest analysis of each), or None without history."""
        rows = self.db.execute(
            """SELECT a.result FROM captures c JOIN analyses a ON a.capture_uuid = c.uuid
               WHERE c.tube = ? AND instr(c.section, ?) > 0 AND c.started_at < ?
               AND c.complete = 1 ORDER BY c.started_at""", [tube, section, before]).fetchall()
        vals = []
        for (res,) in rows:
            m = json.loads(res).get("sections", {}).get(section, {})
            if m.get("cold_start_ok") and m.get("cold_resistance_20c_ohm"):
                vals.append(m["cold_resistance_20c_ohm"])
        if not vals:
            return None
        vals.sort()
        mid = len(vals) // 2
        return vals[mid] if len(vals) % 2 else 0.5 * (vals[mid - 1] + vals[mid])

    def save_calibration(self, cal: dict) -> None:
        with self.transaction() as conn:
            conn.execute("INSERT INTO calibrations (board, at, data) VALUES (?, ?, ?)",
                         [cal.get("board"), cal.get("at"), json.dumps(cal)])

    def calibrations(self, board: str | None = None) -> list[dict]:
        sql = "SELECT data FROM calibrations" + (" WHERE board = ?" if board else "")
        return [json.loads(r[0]) for r in self.db.execute(sql + " ORDER BY at",
                                                          [board] if board else []).fetchall()]

    def tube(self, label: str) -> dict | None:
        rows = list(self.db["tubes"].rows_where("label = ?", [label]))
        return rows[0] if rows else None
