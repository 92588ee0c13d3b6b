"""`glowtrace analyze`, `reanalyze` and `types` as a user runs them."""

import json
import subprocess
import sys
from pathlib import Path

import pytest

from glowtrace.analysis import ANALYSIS_VERSION
from glowtrace.analysis.curve import from_capture
from glowtrace.analysis.runner import reanalyze
from glowtrace.cli import main
from glowtrace.analysis.csvio import write_curve
from glowtrace.procedures.capture import run_capture
from glowtrace.logbook.store import Store
from curves import first_order
from simhelp import sim_url

GLOWTRACE = str(Path(sys.executable).parent / "glowtrace")
KEYS = ["peak_current_a", "cold_resistance_ohm", "cold_resistance_20c_ohm", "hot_current_a",
        "hot_resistance_ohm", "hot_power_w", "hot_cold_ratio", "inrush_ratio", "warmup_50_s",
        "warmup_90_s", "settle_1pct_s", "flash_index", "cold_start_ok", "warnings",
        "rated_peak_current_a", "rated_warmup_90_s", "series_warmup_s"]


@pytest.fixture(scope="module")
def stored(tmp_path_factory):
    db = tmp_path_factory.mktemp("db") / "shop.db"
    with Store(db) as s:
        raw = run_capture(sim_url(tube="12AX7", flash_b=0.1, seed=8), s, "KS-1", "B", {},
                          tube_type="12AX7")
    return db, raw


def test_analyze_json_has_every_key(tmp_path, cli):
    p = tmp_path / "scope.csv"
    write_curve(p, first_order(), "an oscilloscope export")
    rc, out, err = cli("analyze", p, "--json", "--ambient-c", "23", "--rated-volts", "6.3",
                       "--rated-amps", "0.15", "--no-fit")
    assert rc == 0, err
    m = json.loads(out)
    assert set(KEYS) <= set(m)
    assert m["ambient_c"] == 23 and m["rated_volts"] == 6.3


def test_stored_capture_exported_and_analysed_agrees(stored, tmp_path, capsys):
    db, raw = stored
    with Store(db) as s:
        back = s.load_capture(raw.uuid)
        kept = s.analysis(raw.uuid)["sections"]["B"]
    p = tmp_path / "b.csv"
    write_curve(p, from_capture(back)["B"])
    rc = main(["analyze", str(p), "--type", "12AX7", "--ambient-c", str(back.ambient_c),
               "--json", "--plot", str(tmp_path / "b.png")])
    m = json.loads(capsys.readouterr().out)
    assert rc == 0
    for k in ("cold_resistance_20c_ohm", "hot_current_a", "warmup_90_s", "flash_index"):
        assert m[k] == pytest.approx(kept[k], rel=1e-3), k
    assert kept["flash_index"] == pytest.approx(0.1, rel=0.2)
    assert (tmp_path / "b.png").read_bytes()[:4] == b"\x89PNG"


def test_analyze_readable_output_has_a_plot(tmp_path):
    p = tmp_path / "c.csv"
    write_curve(p, first_order())
    r = subprocess.run([GLOWTRACE, "analyze", str(p), "--type", "12AX7"],
                       capture_output=True, text=True, env={"COLUMNS": "100", "PATH": ""})
    assert r.returncode == 0, r.stderr
    assert "warmup_90_s" in r.stdout and "time after switch-on" in r.stdout


def test_capture_summary_includes_analysis(stored):
    _, raw = stored
    secs = raw.analysis["sections"]
    assert set(secs) == {"B"} and secs["B"]["cold_start_ok"] is True
    assert secs["B"]["analysis_version"] == ANALYSIS_VERSION
    assert secs["B"]["thermal_model"]["model"].startswith("wire-sleeve")


def test_reanalyze_only_what_lacks_the_current_version(stored, capsys):
    db, raw = stored
    with Store(db) as s:
        assert reanalyze(s) == ([], {})
        s.db.execute("DELETE FROM analyses")
        assert reanalyze(s) == ([raw.uuid], {})
        assert s.analysis(raw.uuid)["sections"]["B"]["flash_index"] > 0.05
    assert main(["reanalyze", "--force", "--db", str(db), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["analysed"] == 1


def test_show_writes_a_figure(stored, tmp_path, capsys):
    db, raw = stored
    png = tmp_path / "show.png"
    assert main(["show", raw.uuid[:8], "--db", str(db), "--plot", str(png)]) == 0
    assert png.read_bytes()[:4] == b"\x89PNG"


def test_types_lists_the_catalogue(capsys):
    assert main(["types", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)
    ax7 = next(r for r in rows if r["type"] == "12AX7")
    assert ax7["section_volts"] == 6.3 and ax7["section_amps"] == 0.15


def test_capture_with_unknown_type_stops_before_switching_on(tmp_path):
    r = subprocess.run([GLOWTRACE, "capture", "--port", sim_url(), "--tube", "X",
                        "--section", "A", "--type", "12AX9", "--db", str(tmp_path / "x.db")],
                       capture_output=True, text=True)
    assert r.returncode == 1 and "unknown tube type" in r.stderr
    assert not (tmp_path / "x.db").exists()
