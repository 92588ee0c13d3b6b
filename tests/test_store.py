"""The SQLite logbook: lossless samples, migrations, whole-or-nothing writes."""

import contextlib
import dataclasses
import sqlite3

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from glowtrace.logbook import samples_codec, store as store_mod
from glowtrace.tester.raw import RawCapture, blocks_equal
from glowtrace.errors import StoreError
from glowtrace.procedures.capture import run_capture
from glowtrace.tester.protocol import Block
from glowtrace.logbook.store import Store
from simhelp import sim_url


def _raw(blocks, **kw):
    return RawCapture(tube="T1", section="A", port="test", hello={"board": "x"},
                      channels=["ia", "ib", "v"], blocks=blocks,
                      end={"reason": "settled", "blocks": len(blocks),
                           "sets": sum(b.n_sets for b in blocks)}, **kw)


@st.composite
def block_lists(draw):
    nch = draw(st.integers(1, 4))
    out, t = [], -32000
    for i in range(draw(st.integers(1, 6))):
        n = draw(st.integers(1, 50))
        vals = draw(st.lists(st.integers(0, 65535), min_size=n * nch, max_size=n * nch))
        interval = draw(st.integers(1, 10000))
        out.append(Block(1, i, i, nch, n, draw(st.integers(1, 16)), t, interval,
                         np.array(vals, "<u2").tobytes()))
        t += n * interval
    return out


@settings(max_examples=60, deadline=None)
@given(block_lists())
def test_codec_is_lossless_for_any_values(blocks):
    enc = samples_codec.ENCODING
    assert blocks_equal(samples_codec.decode(enc, *samples_codec.encode(blocks)), blocks)
    # and the older encoding still reads back
    old = samples_codec.PLANES
    assert blocks_equal(samples_codec.decode(old, *samples_codec.encode_planes(blocks)), blocks)


def test_simulated_capture_stored_and_read_back_bit_exact(db_path):
    with Store(db_path) as s:
        raw = run_capture(sim_url(tube="6V6", seed=5), s, "KS-1", "A", {"max_s": 20},
                          tube_type="6V6")
        back = s.load_capture(raw.uuid[:8])
        rows = s.list_captures()
    assert raw.complete and blocks_equal(back.blocks, raw.blocks)
    for a, b in zip(raw.arrays(), back.arrays()):
        assert np.array_equal(a, b)
    assert back.hello == raw.hello and back.params == raw.params
    assert back.hello["calibration"] == raw.hello["calibration"]
    assert rows[0]["type"] == "6V6" and rows[0]["complete"] == 1
    assert rows[0]["sample_bytes"] < 50_000  # a few tens of kB per capture


def test_incomplete_capture_recorded_with_reason(db_path):
    with Store(db_path) as s:
        raw = run_capture(sim_url(reset_at_s=0.8), s, "KS-2", "A", {})
        back = s.load_capture(raw.uuid)
        row = s.list_captures()[0]
    assert not raw.complete and "reset" in raw.incomplete_reason
    assert row["complete"] == 0 and "reset" in row["incomplete_reason"]
    assert back.blocks and blocks_equal(back.blocks, raw.blocks)  # nothing thrown away


def test_migrations_are_recorded(db_path):
    with Store(db_path) as s:
        rows = list(s.db["schema_migrations"].rows)
    assert [r["version"] for r in rows] == [v for v, _, _ in store_mod.MIGRATIONS]
    with Store(db_path) as s:  # reopening applies nothing twice
        assert s.db["schema_migrations"].count == len(store_mod.MIGRATIONS)


def test_newer_schema_is_refused_and_left_alone(db_path):
    with Store(db_path) as s:
        s.db["schema_migrations"].insert({"version": 99, "name": "future", "applied_at": "x"})
    before = db_path.read_bytes()
    with pytest.raises(StoreError, match="newer glowtrace"):
        Store(db_path)
    assert db_path.read_bytes() == before


def test_failed_write_leaves_nothing(db_path, monkeypatch):
    blocks = [Block(1, 0, 0, 3, 2, 1, 0, 24, b"\x01\x00" * 6)]
    real_insert = store_mod._insert

    def failing_insert(conn, table, row):
        if table == "capture_samples":  # the last of the capture's three rows
            raise sqlite3.OperationalError("disk I/O error")
        real_insert(conn, table, row)
    with Store(db_path) as s:
        monkeypatch.setattr(store_mod, "_insert", failing_insert)
        with pytest.raises(StoreError, match="not stored"):
            s.save_capture(_raw(blocks))
        monkeypatch.undo()
        assert s.db["captures"].count == 0 and s.db["tubes"].count == 0
        s.save_capture(_raw(blocks))  # and the database is still usable
        assert s.db["captures"].count == 1


def test_locked_database_gives_clear_error(db_path):
    Store(db_path).close()
    other = sqlite3.connect(db_path)
    other.execute("BEGIN EXCLUSIVE")
    try:
        # with the write-ahead log the logbook still opens and reads; a write waits,
        # then says who holds it
        with Store(db_path, timeout=0.2) as s, \
                pytest.raises(StoreError, match="locked by another program"):
            assert s.list_captures() == []
            with s.transaction():
                pass
    finally:
        other.rollback()
        other.close()


def test_not_a_database_gives_clear_error(tmp_path):
    p = tmp_path / "junk.db"
    p.write_bytes(b"this is not sqlite" * 100)
    with pytest.raises(StoreError, match="cannot use database"):
        Store(p)


def test_killed_writer_leaves_database_consistent(db_path, tmp_path):
    """A process killed in the middle of writing captures: every capture that
    committed is whole, the rest absent."""
    import os
    import signal
    import subprocess
    import sys
    import time
    script = tmp_path / "writer.py"
    script.write_text(
        "import sys\nfrom glowtrace.logbook.store import Store\n"
        "from glowtrace.tester.raw import RawCapture\nfrom glowtrace.tester.protocol import Block\n"
        "import numpy as np\n"
        "s = Store(sys.argv[1])\n"
        "data = np.arange(3000 * 3, dtype='<u2').tobytes()\n"
        "for i in range(100000):\n"
        "    b = [Block(1, 0, 1, 3, 3000, 1, 0, 24, data)]\n"
        "    s.save_capture(RawCapture(tube='K', section='A', port='p', hello={},\n"
        "        channels=['ia','ib','v'], blocks=b, end={'reason':'x','blocks':1,'sets':3000}))\n"
        "    print(i, flush=True)\n")
    p = subprocess.Popen([sys.executable, str(script), str(db_path)],
                         stdout=subprocess.PIPE, text=True)
    for _ in range(5):
        p.stdout.readline()
    time.sleep(0.05)
    os.kill(p.pid, signal.SIGKILL)
    p.wait()
    with Store(db_path) as s:
        # the logbook runs a write-ahead log with synchronous=NORMAL: still
        # whole-or-absent when the writer dies
        assert s.db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert s.db.execute("PRAGMA synchronous").fetchone()[0] == 1  # NORMAL
        assert s.db.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        n = s.db["captures"].count
        assert n >= 5 and s.db["capture_samples"].count == n
        for row in s.list_captures():
            assert s.load_capture(row["uuid"]).n_sets == 3000


def _analysis(version, hot):
    sec = {"cold_start_ok": True, "warnings": [], "cold_resistance_20c_ohm": 6.2,
           "rated_hot_current_a": hot, "hot_current_a": hot}
    return {"analysis_version": version, "sections": {"A": sec}}


def _current(s, uuid):
    return s.db.execute("SELECT version FROM section_metrics WHERE capture_uuid = ? "
                        "AND current = 1", [uuid]).fetchall()


def test_newest_analysis_is_marked_current_by_the_logbook(db_path):
    # versions compare as numbers ("1.10" after "1.9"); deleting the newest
    # makes the one before it current again, whoever deletes it
    with Store(db_path) as s:
        uuid = s.save_capture(_raw([Block(1, 0, 0, 3, 1, 1, 0, 100, b"\0" * 6)]))
        s.save_analysis(uuid, _analysis("1.10", 0.15))
        s.save_analysis(uuid, _analysis("1.9", 0.16))
        assert _current(s, uuid) == [("1.10",)]
        with s.transaction() as conn:
            conn.execute("DELETE FROM section_metrics WHERE version = '1.10'")
        assert _current(s, uuid) == [("1.9",)]


def test_type_figures_are_kept_until_the_logbook_changes(db_path, monkeypatch):
    from glowtrace.analysis import ANALYSIS_VERSION
    from glowtrace.judgement import scoring
    with Store(db_path) as s:
        for k, hot in enumerate((0.150, 0.152, 0.149)):  # three tubes of the type
            raw = dataclasses.replace(_raw([Block(1, 0, 0, 3, 1, 1, 0, 100, b"\0" * 6)]),
                                      tube=f"T{k}")
            s.save_analysis(s.save_capture(raw, tube_type="12AX7"), _analysis(ANALYSIS_VERSION, hot))
        first = scoring.type_figures(s, "12AX7")
        assert list(first.population["rated_hot_current_a"]) == [0.149, 0.150, 0.152]
        computed = []
        monkeypatch.setattr(scoring, "_figures",
                            lambda rows, real=scoring._figures: computed.append(1) or real(rows))
        kept = scoring.type_figures(s, "12AX7")  # unchanged logbook: read back, not computed
        assert computed == [] and kept.noise_raw == first.noise_raw
        assert list(kept.population["rated_hot_current_a"]) == [0.149, 0.150, 0.152]
        uuid = s.save_capture(_raw([Block(1, 0, 0, 3, 1, 1, 0, 100, b"\0" * 6)]),
                              tube_type="12AX7")
        s.save_analysis(uuid, _analysis(ANALYSIS_VERSION, 0.2))
        again = scoring.type_figures(s, "12AX7")
        assert computed == [1] and 0.2 in list(again.population["rated_hot_current_a"])


def store_old_way(s, raw, tube_type=None):
    """A capture written as glowtrace wrote one before schema 7 (its HELLO in
    the row, the older sample encoding), into a logbook of an older schema."""
    import json
    meta, samples = samples_codec.encode_planes(raw.blocks)
    with s.transaction() as conn:
        conn.execute("INSERT OR IGNORE INTO tubes (label, type, created_at) VALUES (?, ?, 'x')",
                     [raw.tube, tube_type])
        conn.execute(
            "INSERT INTO captures (uuid, tube, section, started_at, stored_at, complete, "
            "board_id, port, n_sets, n_blocks, params, hello, phases, end_record, "
            "trip_record, link) VALUES (?, ?, ?, ?, 'x', 1, 'b', 'p', ?, ?, '{}', ?, '[]', ?, "
            "'null', '{}')",
            [raw.uuid, raw.tube, raw.section, raw.started_at, raw.n_sets, len(raw.blocks),
             json.dumps(raw.hello), json.dumps(raw.end)])
        conn.execute("INSERT INTO capture_samples VALUES (?, ?, ?, ?, ?, ?)",
                     [raw.uuid, samples_codec.PLANES, json.dumps(raw.channels), raw.n_sets,
                      meta, samples])
    return raw.uuid


def test_schema_5_logbook_gains_the_current_flag_and_tester_records(db_path, monkeypatch):
    # a logbook written before migrations 6 and 7, two analysis versions of a
    # capture: the migrations mark the newest current and move the HELLO out
    monkeypatch.setattr(store_mod, "MIGRATIONS", store_mod.MIGRATIONS[:5])
    monkeypatch.setattr(store_mod, "LATEST", 5)
    raw = _raw([Block(1, 0, 0, 3, 1, 1, 0, 100, b"\0" * 6)])
    with Store(db_path) as s:
        uuid = store_old_way(s, raw)
        s.save_analysis(uuid, _analysis("2.0", 0.15))
        s.save_analysis(uuid, _analysis("2.10", 0.15))
    monkeypatch.undo()
    with Store(db_path) as s:
        assert s.schema_version() == store_mod.LATEST
        assert _current(s, uuid) == [("2.10",)]
        row = s.db["captures"].get(uuid)
        assert "frontend" not in row["hello"] and s.db["tester_records"].count == 1
        back = s.load_capture(uuid)
        assert back.hello == raw.hello and blocks_equal(back.blocks, raw.blocks)


def test_captures_stored_in_the_older_encoding_still_load(db_path):
    with sim_tester_capture() as raw, Store(db_path) as s:
        uuid = s.save_capture(raw)
        meta, samples = samples_codec.encode_planes(raw.blocks)
        with s.transaction() as conn:
            conn.execute("UPDATE capture_samples SET encoding = ?, blocks = ?, samples = ? "
                         "WHERE capture_uuid = ?", [samples_codec.PLANES, meta, samples, uuid])
        assert blocks_equal(s.load_capture(uuid).blocks, raw.blocks)


@contextlib.contextmanager
def sim_tester_capture():
    from simhelp import sim_tester
    with sim_tester(tube="12AX7", seed=2) as t:
        yield t.capture("T1", "A", {"max_s": 2})


def test_a_testers_record_is_kept_once(db_path):
    with sim_tester_capture() as first, sim_tester_capture() as second, Store(db_path) as s:
        for raw in (first, second):
            s.save_capture(raw)
        assert s.db["tester_records"].count == 1
        assert s.load_capture(second.uuid).hello == second.hello
