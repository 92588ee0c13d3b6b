"""Records, history scoring and the logbook commands, end to end."""

import json
import sqlite3

import numpy as np
import pytest

from glowtrace import config
from glowtrace.judgement import scoring
from glowtrace.logbook import store as store_mod
from glowtrace.cli import main
from glowtrace.analysis.csvio import write_curve
from glowtrace.logbook.store import Store
from curves import heater


def gt(capsys, *args):
    """Run a command in-process; (exit code, parsed JSON or text, stderr)."""
    rc = main(list(args))
    cap = capsys.readouterr()
    try:
        return rc, json.loads(cap.out), cap.err
    except json.JSONDecodeError:
        return rc, cap.out, cap.err


def import_series(capsys, db, tmp_path, label, n=10, drift=0.0, flash_step=0.0,
                  warm_at=None, temps=None, month0=1, type_name="12AX7"):
    rng = np.random.default_rng(abs(hash(label)) % 2 ** 32)
    for k in range(n):
        amb = float(temps[k] if temps is not None else rng.uniform(20, 23))
        c = heater(r20=6.2 * (1 + drift * k), f=flash_step * k, ambient_c=amb, seed=k,
                   warm_k=400.0 if k == warm_at else 0.0)
        p = tmp_path / f"{label}-{k}.csv"
        write_curve(p, c)
        year, month = 2025 + (month0 + k - 1) // 12, (month0 + k - 1) % 12 + 1
        rc, out, err = gt(capsys, "import", str(p), "--tube", label, "--type", type_name,
                          "--section", "A", "--at", f"{year}-{month:02d}-05T10:00:00Z",
                          "--ambient-c", f"{amb:.2f}", "--db", str(db), "--json")
        assert rc == 0, err


def history(capsys, db, label):
    rc, out, err = gt(capsys, "history", label, "--db", str(db), "--json")
    assert rc == 0, err
    return out


def test_slowly_failing_tube_is_drifting(capsys, tmp_path):
    db = tmp_path / "shop.db"
    import_series(capsys, db, tmp_path, "DR-1", drift=0.008, flash_step=0.004)
    h = history(capsys, db, "DR-1")
    assert h["drifting"] is True and h["status"] in ("drifting", "at limit")
    text = " ".join(h["reasons"])
    assert "cold resistance at 20 C" in text and "flash index" in text
    assert len(h["captures"]) == 10
    assert all("at" in c and "cold_start_ok" in c for c in h["captures"])
    a = h["sections"]["A"]["metrics"]
    assert a["cold_resistance_20c_ohm"]["trend_significant"]
    assert a["flash_index"]["trend_per_year"] > 0


def test_steady_tube_at_different_room_temperatures_is_not_drifting(capsys, tmp_path):
    db = tmp_path / "shop.db"
    temps = [18.0, 26.0, 19.5, 24.0, 21.0, 25.5, 18.5, 23.0, 20.0, 26.0]
    import_series(capsys, db, tmp_path, "ST-1", temps=temps)
    h = history(capsys, db, "ST-1")
    assert h["drifting"] is False and h["status"] == "steady", h["reasons"]
    r20 = [c["cold_resistance_20c_ohm"] for c in h["captures"]]
    raw = [c["cold_resistance_ohm"] for c in h["captures"]]
    assert np.ptp(raw) / np.mean(raw) > 0.03      # the room moved the raw reading ...
    assert np.ptp(r20) / np.mean(r20) < 0.003     # ... corrected to 20 C it did not


def test_steady_tube_with_one_warm_capture(capsys, tmp_path):
    db = tmp_path / "shop.db"
    import_series(capsys, db, tmp_path, "ST-2", warm_at=6)
    h = history(capsys, db, "ST-2")
    assert h["drifting"] is False and h["status"] == "steady", h["reasons"]
    warm = h["captures"][6]
    assert warm["cold_start_ok"] is False and warm["scored"] is False
    assert "not a cold start" in warm["excluded"]
    assert sum(c["scored"] for c in h["captures"]) == 9


def test_records_and_deletion_leave_no_orphans(capsys, tmp_path):
    db = str(tmp_path / "shop.db")
    assert gt(capsys, "owner", "add", "Orla Venn", "--contact", "0117", "--db", db)[0] == 0
    assert gt(capsys, "tube", "add", "KS-1", "--type", "ECC83", "--owner", "Orla Venn",
              "--db", db)[0] == 0
    import_series(capsys, db, tmp_path, "KS-1", n=2)
    rc, t, _ = gt(capsys, "tube", "show", "KS-1", "--db", db, "--json")
    assert t["type"] == "12AX7" and t["sections"] == ["A", "B"] and len(t["captures"]) == 2
    assert gt(capsys, "tube", "rename", "KS-1", "KS-1b", "--db", db)[0] == 0
    assert gt(capsys, "owner", "add", "Marek", "--db", db)[0] == 0
    assert gt(capsys, "tube", "move", "KS-1b", "--owner", "Marek", "--db", db)[0] == 0
    rc, tubes, _ = gt(capsys, "tube", "list", "--owner", "Marek", "--db", db, "--json")
    assert [x["label"] for x in tubes] == ["KS-1b"] and tubes[0]["captures"] == 2
    rc, _, err = gt(capsys, "owner", "delete", "Marek", "--yes", "--db", db)
    assert rc == 1 and "still owns 1 tube" in err
    rc, _, err = gt(capsys, "tube", "delete", "KS-1b", "--db", db)  # stdin is not a terminal
    assert rc == 1 and "--yes" in err
    assert gt(capsys, "tube", "delete", "KS-1b", "--yes", "--db", db)[0] == 0
    with Store(db) as s:
        for table in ("captures", "capture_samples", "analyses", "section_metrics", "tubes"):
            assert s.db[table].count == 0, table
        assert s.db.execute("PRAGMA foreign_key_check").fetchall() == []
    assert gt(capsys, "owner", "delete", "Marek", "--yes", "--db", db)[0] == 0


def _snapshot(db):
    with sqlite3.connect(db) as c:
        return {t: c.execute(f"SELECT count(*) FROM {t}").fetchone()[0]
                for t in ("tubes", "captures", "analyses", "owners")}


def test_bad_input_changes_nothing(capsys, tmp_path):
    db = tmp_path / "shop.db"
    import_series(capsys, db, tmp_path, "KS-2", n=1)
    good = tmp_path / "KS-2-0.csv"
    before = _snapshot(db)
    cases = [
        (["history", "NOPE"], "no tube 'NOPE'"),
        (["import", str(good), "--tube", "NEW", "--section", "A", "--at", "2025-01-01",
          "--ambient-c", "21"], "give its --type"),
        (["import", str(good), "--tube", "KS-2", "--type", "12AX9", "--section", "A", "--at",
          "2025-01-01", "--ambient-c", "21"], "unknown tube type"),
        (["import", str(good), "--tube", "KS-2", "--type", "EL34", "--section", "A", "--at",
          "2025-01-01", "--ambient-c", "21"], "recorded as a 12AX7"),
        (["import", str(good), "--tube", "KS-2", "--section", "A", "--at", "2999-01-01",
          "--ambient-c", "21"], "in the future"),
        (["import", str(good), "--tube", "KS-2", "--section", "A", "--at", "last tuesday",
          "--ambient-c", "21"], "not an ISO 8601"),
        (["tube", "add", "X", "--type", "12AX7", "--owner", "Nobody"], "no owner"),
        (["tube", "rename", "NOPE", "X"], "no tube"),
    ]
    for args, msg in cases:
        rc, _, err = gt(capsys, *args, "--db", str(db))
        assert rc == 1 and msg in err and "Traceback" not in err, (args, err)
    assert _snapshot(db) == before


def test_newer_or_locked_database_is_refused(capsys, tmp_path):
    db = tmp_path / "shop.db"
    Store(db).close()
    with sqlite3.connect(db) as c:
        c.execute("INSERT INTO schema_migrations VALUES (99, 'future', 'x')")
    before = db.read_bytes()
    rc, _, err = gt(capsys, "tube", "list", "--db", str(db))
    assert rc == 1 and "newer glowtrace" in err and db.read_bytes() == before
    db2 = tmp_path / "locked.db"
    Store(db2).close()
    other = sqlite3.connect(db2)
    other.execute("BEGIN EXCLUSIVE")
    try:
        old = store_mod.Store.__init__.__defaults__
        store_mod.Store.__init__.__defaults__ = (True, 0.2)
        # readers go on while another program writes (write-ahead log); a
        # write waits, then says who holds the logbook
        rc, _, err = gt(capsys, "tube", "list", "--db", str(db2))
        assert rc == 0, err
        rc, _, err = gt(capsys, "tube", "add", "LK-1", "--type", "12AX7", "--db", str(db2))
        assert rc == 1 and "locked by another program" in err
    finally:
        store_mod.Store.__init__.__defaults__ = old
        other.rollback()
        other.close()


def test_type_comparison_grade_and_user_settings(capsys, tmp_path, monkeypatch):
    db = tmp_path / "stock.db"
    # six tubes of a type; one draws 9 % less current than rated
    for n, scale in enumerate([1.0, 1.0, 1.01, 0.99, 1.0, 1.09]):
        c = heater(r20=6.2 * scale, ambient_c=21.0, seed=n)
        p = tmp_path / f"t{n}.csv"
        write_curve(p, c)
        assert gt(capsys, "import", str(p), "--tube", f"T{n}", "--type", "12AX7", "--section",
                  "A", "--at", "2025-05-01T09:00:00", "--ambient-c", "21", "--db", str(db))[0] == 0
    rc, rows, _ = gt(capsys, "stock", "--db", str(db), "--json", "--csv", str(tmp_path / "s.csv"))
    grades = {r["tube"]: r["grade"] for r in rows}
    assert grades["T0"] == "select" and grades["T5"] == "serviceable"
    t5 = next(r for r in rows if r["tube"] == "T5")
    assert t5["current_deviation"]["A"] == pytest.approx(-0.083, abs=0.01)
    lines = (tmp_path / "s.csv").read_text().splitlines()
    assert lines[0].startswith("tube,type,owner,section,status,grade") and len(lines) == 7
    h = history(capsys, db, "T5")
    # the percentile is of the hot current at rated voltage (analysis 2.0)
    assert h["against_type"]["percentile"]["A"]["rated_hot_current_a"] < 20
    # the user's own thresholds change the grade
    mine = tmp_path / "scoring.toml"
    mine.write_text('[[grades]]\nname = "keeper"\nmax_current_deviation = 0.2\n')
    rc, rows, _ = gt(capsys, "stock", "--db", str(db), "--json", "--config", str(mine))
    assert {r["grade"] for r in rows} == {"keeper"}


def test_section_imbalance_from_a_dual_capture(capsys, tmp_path):
    from glowtrace.procedures.capture import run_capture
    from simhelp import sim_url
    db = tmp_path / "dual.db"
    with Store(db) as s:
        run_capture(sim_url(tube="12AX7", seed=3), s, "D-1", "AB", {}, tube_type="12AX7")
        h = scoring.history(s, "D-1", config.load())
    assert set(h["sections"]) == {"A", "B"}
    assert h["against_type"]["section_imbalance"] < 0.03


def test_report_export_and_merge(capsys, tmp_path):
    a, b = tmp_path / "a.db", tmp_path / "b.db"
    import_series(capsys, a, tmp_path, "R-1", n=4)
    import_series(capsys, b, tmp_path, "R-2", n=3, month0=3)
    html = tmp_path / "r.html"
    assert gt(capsys, "report", "R-1", "-o", str(html), "--db", str(a))[0] == 0
    page = html.read_text()
    assert page.count("data:image/png;base64,") == 2 and "class='verdict " in page
    assert "discharge the filter capacitors" in page
    exported = tmp_path / "copy.db"
    assert gt(capsys, "export", str(exported), "--db", str(a))[0] == 0
    rc, res, _ = gt(capsys, "merge", str(b), "--db", str(exported), "--json")
    assert res["added"]["captures"] == 3 and res["added"]["tubes"] == 1
    rc, res, _ = gt(capsys, "merge", str(b), "--db", str(exported), "--json")
    assert sum(res["added"].values()) == 0  # nothing twice
    rc, res, _ = gt(capsys, "merge", str(a), "--db", str(exported), "--json")
    assert sum(res["added"].values()) == 0
    with Store(exported) as s:
        assert s.db["captures"].count == 7
        assert s.db.execute("PRAGMA foreign_key_check").fetchall() == []
        assert scoring.history(s, "R-2", config.load())["captures"]


def test_migration_from_schema_2_backfills_metrics(tmp_path, monkeypatch):
    from glowtrace.tester.protocol import Block
    from test_store import _raw, store_old_way
    db = tmp_path / "old.db"
    monkeypatch.setattr(store_mod, "MIGRATIONS", store_mod.MIGRATIONS[:2])
    monkeypatch.setattr(store_mod, "LATEST", 2)
    raw = _raw([Block(1, 0, 0, 3, 1, 1, 0, 24, b"\x01\x00" * 3)])
    result = {"analysis_version": "1.0", "section_imbalance": None, "sections": {"A": {
        "cold_start_ok": True, "cold_resistance_ohm": 6.3, "cold_resistance_20c_ohm": 6.25,
        "hot_current_a": 0.15, "inrush_ratio": 6.6, "warnings": []}}}
    with Store(db) as s:
        assert s.schema_version() == 2
        store_old_way(s, raw, tube_type="12AX7")
        s.db.execute("INSERT INTO analyses VALUES (?, '1.0', 'x', ?)",
                     [raw.uuid, json.dumps(result)])
    monkeypatch.undo()
    with Store(db) as s:
        assert s.schema_version() == store_mod.LATEST
        rows = list(s.db["section_metrics"].rows)
        assert len(rows) == 1 and rows[0]["scored"] == 1
        assert rows[0]["inrush_20c"] == pytest.approx(6.6 * 6.3 / 6.25)
        assert s.capture_source(raw.uuid) == "tester"


def test_capture_refuses_sections_or_types_that_do_not_fit(capsys, tmp_path):
    from simhelp import sim_url
    db = str(tmp_path / "c.db")
    rc, _, err = gt(capsys, "capture", "--port", sim_url(), "--tube", "P-1", "--type", "EL34",
                    "--section", "AB", "--db", db)
    assert rc == 1 and "no section B" in err
    assert gt(capsys, "tube", "add", "P-2", "--type", "6V6", "--db", db)[0] == 0
    rc, _, err = gt(capsys, "capture", "--port", sim_url(), "--tube", "P-2", "--type", "EL84",
                    "--section", "A", "--db", db)
    assert rc == 1 and "recorded as a 6V6" in err
    with Store(db) as s:
        assert s.db["captures"].count == 0


def test_show_an_imported_capture(capsys, tmp_path):
    db = tmp_path / "i.db"
    import_series(capsys, db, tmp_path, "IM-1", n=1)
    rc, rows, _ = gt(capsys, "list", "--db", str(db), "--json")
    rc, shown, err = gt(capsys, "show", rows[0]["uuid"][:8], "--db", str(db), "--json",
                        "--plot", str(tmp_path / "im.png"))
    assert rc == 0, err
    assert shown["source"] == "import" and shown["analysis"]["sections"]["A"]["cold_start_ok"]
    assert (tmp_path / "im.png").read_bytes()[:4] == b"\x89PNG"
