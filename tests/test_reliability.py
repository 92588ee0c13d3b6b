"""Nothing lost, nothing silently wrong: a capture survives a busy logbook
(kept whole in a file, stored later), a closed terminal and a paused host; a
capture cut short by the tester for the bench's sake is incomplete and never
scored; faults of the tester are not blamed on the tube; an intermittent
socket contact is caught; a capture that cannot be analysed is stored with
its reason and does not block the rest of the logbook."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from glowtrace.analysis.csvio import write_curve
from glowtrace.cli import main
from glowtrace.logbook import floatrows
from glowtrace.logbook.store import Store
from glowtrace.procedures.capture import CaptureNotStored, run_capture

from curves import heater
from simhelp import sim_url

GLOWTRACE = str(Path(sys.executable).parent / "glowtrace")
HOLD_WRITE = """
import sqlite3, sys, time
c = sqlite3.connect(sys.argv[1], isolation_level=None)
c.execute("BEGIN IMMEDIATE")  # another writer's lock, held (readers never block: WAL)
c.execute("SELECT count(*) FROM captures").fetchall()
print("holding", flush=True)
time.sleep(float(sys.argv[2]))
"""


def gt(capsys, *argv):
    rc = main(list(argv))
    out, err = capsys.readouterr()
    return rc, out, err


def _hold(db, seconds):
    p = subprocess.Popen([sys.executable, "-c", HOLD_WRITE, str(db), str(seconds)],
                         stdout=subprocess.PIPE, text=True)
    assert p.stdout.readline().strip() == "holding"
    return p


def test_a_busy_logbook_keeps_the_capture_whole_for_later(db_path, capsys, tmp_path):
    Store(db_path).close()
    holder = _hold(db_path, 30)
    try:
        rc, out, err = gt(capsys, "capture", "--port", sim_url(tube="12AX7"), "--tube", "B1",
                          "--type", "12AX7", "--section", "A", "--busy-wait-s", "1",
                          "--db", str(db_path))
    finally:
        holder.kill()
        holder.wait()
    assert rc == 1
    assert "logbook is busy" in err and "kept whole in" in err
    kept = list((tmp_path / "xdg" / "glowtrace" / "unsaved").glob("capture-*.json"))
    assert len(kept) == 1 and str(kept[0]) in " ".join(err.split())
    with Store(db_path) as s:
        assert s.list_captures() == []
    # once the logbook is free, one command stores it: whole, analysed, file gone
    rc, out, err = gt(capsys, "recover", str(kept[0]), "--db", str(db_path), "--json")
    assert rc == 0, err
    assert json.loads(out)[0]["stored"] is True and not kept[0].exists()
    rc, out, _ = gt(capsys, "history", "B1", "--db", str(db_path), "--json")
    caps = json.loads(out)["captures"]
    assert len(caps) == 1 and caps[0]["scored"] and caps[0]["hot_current_a"] > 0.1


def test_store_busy_past_the_wait_raises_with_the_file(db_path):
    Store(db_path).close()
    holder = _hold(db_path, 30)
    try:
        with Store(db_path) as store, pytest.raises(CaptureNotStored) as e:
            run_capture(sim_url(tube="12AX7"), store, "B2", "A", {"max_s": 5},
                        tube_type="12AX7", store_wait_s=0.5)
    finally:
        holder.kill()
        holder.wait()
    assert e.value.path.exists() and e.value.raw.n_sets > 100


def _under_way(p, after_s=1.5):
    """Wait until the capture process has started its simulated tester (its
    micropython child), then after_s more: past the handshake, capturing.
    Start-up time varies with the machine's load; a fixed sleep did not."""
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        kids = Path(f"/proc/{p.pid}/task/{p.pid}/children")
        for pid in (kids.read_text().split() if kids.exists() else []):
            try:
                if b"micropython" in Path(f"/proc/{pid}/cmdline").read_bytes():
                    time.sleep(after_s)
                    return
            except OSError:
                pass
        time.sleep(0.05)
    raise AssertionError("the capture never started its simulated tester")


def _capture_process(db, *extra, url=None):
    return subprocess.Popen(
        [GLOWTRACE, "capture", "--port", url or sim_url(tube="12AX7", pace=1), "--tube", "H1",
         "--type", "12AX7", "--section", "A", "--db", str(db), "--json", *extra],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env=dict(os.environ, COLUMNS="200"))


def _stored(db):
    with Store(db) as s:
        return s.list_captures()


def test_a_closed_terminal_stores_the_partial_capture(db_path):
    """SIGHUP (the terminal closed) stops a capture as Ctrl-C does."""
    p = _capture_process(db_path)
    _under_way(p)  # the simulated heater runs in real time
    p.send_signal(signal.SIGHUP)
    out, err = p.communicate(timeout=30)
    assert p.returncode == 130, err
    caps = _stored(db_path)
    assert len(caps) == 1 and not caps[0]["complete"]
    assert caps[0]["incomplete_reason"] == "interrupted by the user"
    assert "heater off, confirmed" in err


def test_a_paused_host_gets_an_incomplete_unscored_capture(db_path):
    """The host stopped (SIGSTOP) for 4 s: the tester switches off for host
    silence, and that curve, cut short for the bench's sake, is never taken
    for a whole one or scored."""
    p = _capture_process(db_path)
    _under_way(p)
    p.send_signal(signal.SIGSTOP)
    time.sleep(3.0)  # longer than the tester's 2 s of allowed silence
    p.send_signal(signal.SIGCONT)
    out, err = p.communicate(timeout=60)
    assert p.returncode == 2, err
    caps = _stored(db_path)
    assert len(caps) == 1 and not caps[0]["complete"]
    assert "host went silent" in caps[0]["incomplete_reason"]
    h = subprocess.run([GLOWTRACE, "history", "H1", "--db", str(db_path), "--json"],
                       capture_output=True, text=True)
    cap = json.loads(h.stdout)["captures"][0]
    assert not cap["scored"] and "incomplete" in cap["excluded"]


def test_a_firmware_error_is_incomplete_with_exit_2(db_path, capsys):
    rc, out, err = gt(capsys, "capture", "--port", sim_url(tube="12AX7", fault="converter"),
                      "--tube", "E1", "--type", "12AX7", "--section", "A",
                      "--db", str(db_path), "--json")
    assert rc == 2
    assert not json.loads(out)["complete"]
    assert "firmware error" in " ".join(err.split())
    assert "shorted" not in (out + err)  # the tube is not blamed


@pytest.mark.parametrize("channel,trip", [("v", None), ("ia", "open_heater")])
def test_a_broken_channel_is_the_testers_fault_not_the_tubes(db_path, capsys, channel, trip):
    rc, out, err = gt(capsys, "capture", "--port", sim_url(tube="12AX7", broken_channel=channel),
                      "--tube", "K1", "--type", "12AX7", "--section", "A",
                      "--db", str(db_path), "--json")
    assert json.loads(out)["trip"] == trip
    assert "tester's fault" in " ".join(err.split())
    rc, out, _ = gt(capsys, "history", "K1", "--db", str(db_path), "--json")
    h = json.loads(out)
    assert h["status"] != "heater fault" and h["grade"] is None
    assert "shorted" not in out and "heater fault" not in out
    assert h["captures"][0]["excluded"].startswith("not judged: the ")


def test_an_intermittent_contact_is_caught_and_not_scored(db_path, capsys):
    rc, out, err = gt(capsys, "capture", "--port", sim_url(tube="12AX7", fault="intermittent"),
                      "--tube", "I1", "--type", "12AX7", "--section", "A",
                      "--db", str(db_path))
    assert "intermittent contact" in " ".join(err.split()) and "reseat" in err
    rc, out, _ = gt(capsys, "history", "I1", "--db", str(db_path), "--json")
    h = json.loads(out)
    assert not h["captures"][0]["scored"] and h["grade"] is None
    assert "intermittent contact" in h["captures"][0]["excluded"]


def test_a_good_capture_has_no_dropout():
    from glowtrace.analysis.metrics import dropouts
    c = heater(seed=4, noise=0.01)
    on = c.t > 0
    assert len(dropouts(c.t[on], c.i[on], 0.01 * c.i[on][-1])) == 0
    i = c.i[on].copy()
    i[5000] *= 0.3  # one sample where a contact opened for a moment
    assert len(dropouts(c.t[on], i, 0.01 * c.i[on][-1])) == 1


def test_a_capture_that_cannot_be_analysed_does_not_block_the_logbook(db_path, capsys,
                                                                      tmp_path):
    """The start-of-capture frame lost on the link: channels and range
    unknown. The capture is stored with the reason; reanalyze, history and
    report go on past it and say which one it was."""
    from glowtrace.tester.driver import connect
    with connect(sim_url(tube="12AX7", seed=5)) as t:
        raw = t.capture("L1", "A", {"max_s": 8, "range": "low"})
    good = tmp_path / "good.csv"
    write_curve(good, heater(seed=2, t_end=12.0))
    assert gt(capsys, "import", str(good), "--tube", "L1", "--type", "12AX7", "--section",
              "A", "--at", "2026-03-01T10:00", "--ambient-c", "21", "--db", str(db_path))[0] == 0
    raw.channels, raw.params, raw.phases = [], {}, []
    raw.incomplete_reason = "1 frame(s) lost on the link"
    from glowtrace.analysis.runner import analyze_stored
    with Store(db_path) as s:
        s.save_capture(raw)
        res = analyze_stored(s, raw.uuid)
    assert "start record was lost" in res["not_analysed"]
    rc, out, err = gt(capsys, "reanalyze", "--force", "--db", str(db_path), "--json")
    assert rc == 0
    r = json.loads(out)
    assert r["analysed"] == 2 and list(r["not_analysed"]) == [raw.uuid]
    rc, out, err = gt(capsys, "reanalyze", "--force", "--db", str(db_path))
    assert "could not be analysed" in err and raw.uuid in err
    rc, out, _ = gt(capsys, "history", "L1", "--db", str(db_path), "--json")
    assert rc == 0
    excluded = {c["uuid"]: c["excluded"] for c in json.loads(out)["captures"]}
    assert "not analysed" in excluded[raw.uuid]
    assert gt(capsys, "report", "L1", "-o", str(tmp_path / "r.html"),
              "--db", str(db_path))[0] == 0


def test_the_newest_analysis_version_is_chosen_by_number(db_path, tmp_path):
    good = tmp_path / "good.csv"
    write_curve(good, heater(seed=2, t_end=12.0))
    assert main(["import", str(good), "--tube", "V1", "--type", "12AX7", "--section", "A",
                 "--at", "2026-03-01T10:00", "--ambient-c", "21", "--db", str(db_path)]) == 0
    with Store(db_path) as s:
        uuid = s.list_captures()[0]["uuid"]
        base = s.analysis(uuid)
        for v in ("1.10", "1.9", "1.2"):
            s.save_analysis(uuid, dict(base, analysis_version=v, marker=v))
        assert s.analysis(uuid)["analysis_version"] == base["analysis_version"]  # 2.1
        s.db.execute("DELETE FROM analyses WHERE version = ?", [base["analysis_version"]])
        assert s.analysis(uuid)["marker"] == "1.10"  # not "1.9", as text would have it


def test_a_large_curve_is_imported_in_chunks_and_kept_exactly(db_path, tmp_path,
                                                              monkeypatch):
    """Streaming import: read, checked, packed and stored a chunk at a time
    (chunks made small here), every row kept bit for bit; the analysis reads
    means of consecutive rows past MAX_POINTS and finds the same figures."""
    c = heater(seed=6, t_end=12.0)
    p = tmp_path / "big.csv"
    write_curve(p, c)
    full = tmp_path / "full.db"
    assert main(["import", str(p), "--tube", "G1", "--type", "12AX7", "--section", "A",
                 "--at", "2026-03-01T10:00", "--ambient-c", "21", "--db", str(full)]) == 0
    monkeypatch.setattr(floatrows, "CHUNK_ROWS", 1000)
    monkeypatch.setattr(floatrows, "MAX_POINTS", -(-len(c.t) // 4))  # means of 4
    monkeypatch.setattr(floatrows, "_IO_BYTES", 4096)
    assert main(["import", str(p), "--tube", "G1", "--type", "12AX7", "--section", "A",
                 "--at", "2026-03-01T10:00", "--ambient-c", "21", "--db", str(db_path)]) == 0
    with Store(db_path) as s:
        uuid = s.list_captures()[0]["uuid"]
        _, cols = s.load_imported(uuid)
        reduced = s.analysis(uuid)
    with Store(full) as s:
        whole = s.analysis(s.list_captures()[0]["uuid"])
    assert len(cols["time_s"]) == len(c.t)
    assert np.array_equal(cols["amps"], np.array([float(f"{x:.9g}") for x in c.i]))
    a, b = reduced["sections"]["A"], whole["sections"]["A"]
    assert any("analysed as" in w and "means of 4 consecutive rows" in w
               for w in reduced["warnings"]), reduced["warnings"]
    for k in ("hot_current_a", "cold_resistance_20c_ohm", "warmup_90_s"):
        assert a[k] == pytest.approx(b[k], rel=0.02), k


def test_a_figure_without_a_suffix_is_written_as_png_and_named(tmp_path, capsys):
    good = tmp_path / "good.csv"
    write_curve(good, heater(seed=2, t_end=12.0))
    rc, out, err = gt(capsys, "analyze", str(good), "--plot", str(tmp_path / "fig"))
    assert rc == 0
    assert (tmp_path / "fig.png").stat().st_size > 1000
    assert f"wrote {tmp_path / 'fig.png'}" in " ".join(err.split())


def test_a_stale_handshake_frame_lost_is_not_a_hole_in_the_capture():
    """Frames lost before the capture's acknowledgement (a stale reply to the
    handshake) are not frames of the capture: it stays whole."""
    from glowtrace.tester.driver import connect
    with connect(sim_url(tube="12AX7", seed=7)) as t:
        t.link.expect_seq = (t.link.expect_seq - 3) & 0xFFFF  # as if 3 frames went missing
        raw = t.capture("S1", "A", {"max_s": 5, "range": "low"})
    assert raw.complete and raw.link["lost_frames"] == 0
