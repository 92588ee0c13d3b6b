"""One clear line for every bad input: each case runs a command as a user
would get it wrong (settings files with wrong kinds of value, unwritable and
odd paths, labels, extreme dates, NaN and infinite numbers, read-only
logbooks, curves in the wrong units) and asserts the exit status, an error
message on one line without a traceback, and a logbook left exactly as it
was (its bytes)."""

import hashlib
import os
import shutil
import sqlite3
import subprocess

import numpy as np
import pytest

from glowtrace.analysis.csvio import write_curve
from glowtrace.analysis.curve import Curve
from glowtrace.cli import main

from curves import heater

# name -> the file's text; {tmp} is the case's folder
SCORING = {
    "lambda-text": '[charts]\newma_lambda = "x"\n',
    "lambda-nan": "[charts]\newma_lambda = nan\n",
    "cusum-inf": "[charts]\ncusum_h = inf\n",
    "trend-bool": "[charts]\ntrend_p = true\n",
    "count-text": '[baseline]\ncount = "three"\n',
    "charts-number": "charts = 5\n",
    "grades-number": "grades = 5\n",
    "grade-name-number": "[[grades]]\nname = 5\n",
    "grade-list-text": 'grades = ["select"]\n',
    "direction-number": "[limits.flash_index]\ndirection = 3\n",
    "floor-text": '[noise_floor]\nflash_index = "small"\n',
    "limit-negative": "[limits.rated_hot_current_a]\nchange = -0.1\ndirection = \"down\"\n",
    "max-age-text": '[calibration]\nmax_age_days = "old"\n',
    "not-toml": "[charts\newma_lambda = 0.3\n",
    "binary": "\udcff\udcfe",
}
TUBES = {
    "types-number": "types = 5\n",
    "aliases-numbers": "[types.X1]\naliases = [5]\nheater = {volts = 6.3, amps = 0.3}\n",
    "heater-text": '[types.X1]\nheater = "6.3 V"\n',
    "heater-inf": "[types.X1]\nheater = {volts = inf, amps = 0.3}\n",
    "type-text": '[types]\nX1 = "a tube"\n',
    "base-number": "[types.X1]\nbase = 9\nheater = {volts = 6.3, amps = 0.3}\n",
    "warmup-text": '[types.X1]\ncontrolled_warmup_s = "11"\nheater = {volts = 6.3, amps = 0.3}\n',
}


def _curve_csv(path, t_scale=1.0, v=None, i_scale=1.0, i_sign=1.0):
    c = heater(seed=1, t_end=12.0)
    volts = c.v if v is None else np.full_like(c.v, v)
    write_curve(path, Curve(c.t * t_scale, volts, c.i * i_scale * i_sign))
    return path


@pytest.fixture(scope="module")
def template(tmp_path_factory):
    """A small logbook (an owner, a tube with an imported capture) and the
    bad files the cases use."""
    d = tmp_path_factory.mktemp("bad")
    db = d / "template.db"
    good = _curve_csv(d / "good.csv")
    for argv in (["owner", "add", "Orla Quenby"],
                 ["tube", "add", "T1", "--type", "12AX7", "--owner", "Orla Quenby"],
                 ["import", str(good), "--tube", "T1", "--section", "A",
                  "--at", "2026-03-01T10:00", "--ambient-c", "21"]):
        assert main([*argv, "--db", str(db)]) == 0
    _curve_csv(d / "zero-volts.csv", v=0.0)
    _curve_csv(d / "millis.csv", t_scale=1000.0)
    _curve_csv(d / "huge.csv", i_scale=1e300)
    _curve_csv(d / "neg-amps.csv", i_sign=-1.0)
    _curve_csv(d / "kilovolts.csv", v=6300.0)
    (d / "nan.csv").write_text("time_s,volts,amps\n" + "nan,nan,nan\n" * 50)
    (d / "bin.csv").write_bytes(b"\x00\x01\x02binary\xff" * 50)
    (d / "empty.csv").write_text("")
    (d / "latin1.csv").write_bytes("time_s,volts,amps\n# caf\xe9\n".encode("latin-1") * 3)
    (d / "folder").mkdir()
    (d / "empty.db").write_bytes(b"")
    (d / "text.db").write_text("not a database\n")
    other = sqlite3.connect(d / "other.db")
    other.execute("CREATE TABLE invoices (id INTEGER, total REAL)")
    other.commit()
    other.close()
    (d / "not-unsaved.json").write_text('{"format": "something else"}')
    for name, text in SCORING.items():
        p = d / f"scoring-{name}.toml"
        if name == "binary":
            p.write_bytes(b"\xff\xfe\x00")
        else:
            p.write_text(text)
    for name, text in TUBES.items():
        (d / f"tubes-{name}.toml").write_text(text)
    return d, db


def _read_only(path) -> bool:
    """Make a file read-only for this process: chmod, and for root (which
    chmod does not stop) the immutable attribute. False if neither works."""
    os.chmod(path, 0o444)
    if os.access(path, os.W_OK) and shutil.which("chattr"):
        subprocess.run(["chattr", "+i", str(path)], capture_output=True)
    return not os.access(path, os.W_OK)


def _writable_again(path) -> None:
    if shutil.which("chattr"):
        subprocess.run(["chattr", "-i", str(path)], capture_output=True)
    os.chmod(path, 0o644)


def _digest(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest() if path.exists() else "absent"


ARGPARSE = 2
# (id, argv, exit status, words the message must hold, environment)
CASES = [
    # settings files with the wrong kind of value
    *[(f"scoring-{n}-{cmd}", [cmd, *extra, "--config", f"{{dir}}/scoring-{n}.toml"], 1,
       "scoring settings", {})
      for n in SCORING for cmd, extra in (("history", ["T1"]),)],
    *[(f"scoring-{n}-{cmd}", [cmd, *extra], 1, "scoring settings",
       {"GLOWTRACE_SCORING": f"{{dir}}/scoring-{n}.toml"})
      for n in ("lambda-text", "grades-number", "count-text")
      for cmd, extra in (("stock", []), ("report", ["T1", "-o", "{dir}/r.html"]),
                         ("reanalyze", ["--force"]))],
    ("scoring-folder", ["history", "T1", "--config", "{dir}/folder"], 1, "directory", {}),
    ("scoring-missing", ["history", "T1", "--config", "{dir}/none.toml"], 1, "no scoring", {}),
    *[(f"tubes-{n}-{cmd}", [cmd, *extra], 1, "catalogue" if n == "types-number" else "X1",
       {"GLOWTRACE_TUBES": f"{{dir}}/tubes-{n}.toml"})
      for n in TUBES for cmd, extra in (("types", []), ("history", ["T1"]))],
    ("tubes-folder", ["types"], 1, "directory", {"GLOWTRACE_TUBES": "{dir}/folder"}),
    # output paths
    ("report-missing-folder", ["report", "T1", "-o", "{dir}/nowhere/r.html"], 1, "no folder", {}),
    ("report-onto-folder", ["report", "T1", "-o", "{dir}/folder"], 1, "folder", {}),
    ("report-wrong-suffix", ["report", "T1", "-o", "{dir}/r.png"], 1, ".html", {}),
    ("stock-csv-missing-folder", ["stock", "--csv", "{dir}/nowhere/s.csv"], 1, "no folder", {}),
    ("stock-csv-onto-folder", ["stock", "--csv", "{dir}/folder"], 1, "folder", {}),
    ("stock-csv-wrong-suffix", ["stock", "--csv", "{dir}/s.xlsx"], 1, ".csv", {}),
    ("show-plot-missing-folder", ["show", "@uuid", "--plot", "{dir}/nowhere/p.png"], 1,
     "no folder", {}),
    ("show-plot-onto-folder", ["show", "@uuid", "--plot", "{dir}/folder"], 1, "folder", {}),
    ("show-plot-unknown-suffix", ["show", "@uuid", "--plot", "{dir}/p.xyz"], 1, ".png", {}),
    ("analyze-plot-missing-folder", ["analyze", "{dir}/good.csv", "--plot",
                                     "{dir}/nowhere/p.png"], 1, "no folder", {}),
    ("analyze-plot-unknown-suffix", ["analyze", "{dir}/good.csv", "--plot", "{dir}/p.bmpx"],
     1, ".png", {}),
    ("export-exists", ["export", "{dir}/good.csv"], 1, "exists", {}),
    ("export-missing-folder", ["export", "{dir}/nowhere/b.db"], 1, "no folder", {}),
    ("export-onto-folder", ["export", "{dir}/folder"], 1, "folder", {}),
    # other logbooks and files that are not what they should be
    ("merge-folder", ["merge", "{dir}/folder"], 1, "folder", {}),
    ("merge-missing", ["merge", "{dir}/none.db"], 1, "no logbook", {}),
    ("merge-text", ["merge", "{dir}/text.db"], 1, "not a glowtrace logbook", {}),
    ("merge-foreign", ["merge", "{dir}/other.db"], 1, "another program", {}),
    ("merge-empty", ["merge", "{dir}/empty.db"], 1, "empty", {}),
    ("merge-itself", ["merge", "{db}"], 1, "itself", {}),
    ("db-folder", ["list", "--db", "{dir}/folder"], 1, "directory", {}),
    ("db-empty-file", ["list", "--db", "{dir}/empty.db"], 1, "empty file", {}),
    ("db-text", ["list", "--db", "{dir}/text.db"], 1, "not a database", {}),
    ("db-foreign", ["tube", "list", "--db", "{dir}/other.db"], 1, "another program", {}),
    ("recover-missing", ["recover", "{dir}/none.json"], 1, "no file", {}),
    ("recover-other-json", ["recover", "{dir}/not-unsaved.json"], 1, "not an unsaved", {}),
    ("recover-csv", ["recover", "{dir}/good.csv"], 1, "not an unsaved", {}),
    ("recover-folder", ["recover", "{dir}/folder"], 1, "directory", {}),
    # curve files: wrong units, no signal, not a curve
    *[(f"{cmd}-{f}", [cmd, f"{{dir}}/{f}.csv", *extra], 1, words, {})
      for f, words in (("zero-volts", "volts is zero"), ("millis", "milliseconds"),
                       ("huge", "amps reaches"), ("neg-amps", "reversed"),
                       ("kilovolts", "volts reaches"), ("nan", "readable"),
                       ("bin", "text"), ("empty", "no header"),
                       ("latin1", "utf-8 text"), ("missing", "no such file"))
      for cmd, extra in (("analyze", []),
                         ("import", ["--tube", "T1", "--section", "B", "--at",
                                     "2026-03-02T10:00", "--ambient-c", "21"]))],
    ("analyze-folder", ["analyze", "{dir}/folder"], 1, "directory", {}),
    ("import-folder", ["import", "{dir}/folder", "--tube", "T1", "--section", "B", "--at",
                       "2026-03-02T10:00", "--ambient-c", "21"], 1, "directory", {}),
    # extreme and malformed dates
    *[(f"import-at-{n}", ["import", "{dir}/good.csv", "--tube", "T1", "--section", "B",
                          "--at", at, "--ambient-c", "21"], 1, "--at", {})
      for n, at in (("year-1-offset", "0001-01-01T00:00+05:00"), ("year-1", "0001-01-01"),
                    ("far-future", "9999-12-31T23:59"), ("words", "yesterday"),
                    ("empty", ""), ("month-13", "2026-13-01"), ("1850", "1850-06-01"))],
    # NaN, infinite and out-of-range numbers
    ("analyze-rated-volts-inf", ["analyze", "{dir}/good.csv", "--rated-volts", "inf",
                                 "--rated-amps", "0.3"], ARGPARSE, "finite", {}),
    ("analyze-rated-volts-nan", ["analyze", "{dir}/good.csv", "--rated-volts", "nan",
                                 "--rated-amps", "0.3"], ARGPARSE, "finite", {}),
    ("analyze-rated-amps-negative", ["analyze", "{dir}/good.csv", "--rated-volts", "6.3",
                                     "--rated-amps", "-1"], ARGPARSE, "too small", {}),
    ("analyze-rated-volts-huge", ["analyze", "{dir}/good.csv", "--rated-volts", "1e9",
                                  "--rated-amps", "0.3"], 1, "rating", {}),
    ("analyze-ambient-nan", ["analyze", "{dir}/good.csv", "--ambient-c", "nan"], ARGPARSE,
     "finite", {}),
    ("analyze-ambient-hot", ["analyze", "{dir}/good.csv", "--ambient-c", "400"], ARGPARSE,
     "too large", {}),
    ("import-ambient-inf", ["import", "{dir}/good.csv", "--tube", "T1", "--section", "B",
                            "--at", "2026-03-02T10:00", "--ambient-c", "inf"], ARGPARSE,
     "finite", {}),
    *[(f"capture-{opt}-{val}", ["capture", "--port", "glowsim://", "--tube", "T9", "--section",
                                "A", f"--{opt}", val], ARGPARSE, words, {})
      for opt, val, words in (("max-s", "-5", "too small"), ("max-s", "0", "too small"),
                              ("max-s", "nan", "finite"), ("max-s", "inf", "finite"),
                              ("max-s", "1e6", "too large"), ("settle-band", "nan", "finite"),
                              ("settle-band", "2", "too large"),
                              ("settle-hold-s", "-1", "too small"),
                              ("busy-wait-s", "nan", "finite"))],
    ("calibrate-supply-nan", ["calibrate", "--port", "glowsim://", "--supply-v", "nan"],
     ARGPARSE, "finite", {}),
    ("selftest-load-negative", ["selftest", "--port", "glowsim://", "--load-ohm", "-4.7"],
     ARGPARSE, "too small", {}),
    # labels and names
    ("tube-add-empty", ["tube", "add", "", "--type", "12AX7"], 1, "1 to 80", {}),
    ("tube-add-blank", ["tube", "add", "   ", "--type", "12AX7"], 1, "1 to 80", {}),
    ("tube-add-newline", ["tube", "add", "T\nX", "--type", "12AX7"], 1, "control", {}),
    ("tube-add-long", ["tube", "add", "T" * 81, "--type", "12AX7"], 1, "1 to 80", {}),
    ("tube-add-unknown-type", ["tube", "add", "T2", "--type", "12AX9"], 1, "unknown tube", {}),
    ("tube-rename-onto-existing", ["tube", "rename", "T1", "T1"], 1, "exists", {}),
    ("owner-add-empty", ["owner", "add", ""], 1, "1 to 80", {}),
    ("owner-add-tab", ["owner", "add", "Orla\tQuenby"], 1, "control", {}),
    ("owner-delete-with-tubes", ["owner", "delete", "Orla Quenby", "--yes"], 1, "tube", {}),
    ("capture-label-newline", ["capture", "--port", "glowsim://", "--tube", "T\n1",
                               "--section", "A"], 1, "control", {}),
    ("capture-unknown-type", ["capture", "--port", "glowsim://", "--tube", "T9", "--type",
                              "12AX9", "--section", "A"], 1, "unknown tube", {}),
    ("capture-missing-section", ["capture", "--port", "glowsim://", "--tube", "T1",
                                 "--section", "AB", "--type", "6V6"], 1, "recorded as", {}),
    ("show-percent", ["show", "%"], 1, "no capture", {}),
    ("show-underscore", ["show", "_"], 1, "no capture", {}),
    ("show-empty", ["show", ""], 1, "no capture", {}),
    ("history-unknown", ["history", "T404"], 1, "T404", {}),
    ("report-unknown", ["report", "T404", "-o", "{dir}/r.html"], 1, "T404", {}),
    ("delete-without-yes", ["tube", "delete", "T1"], 1, "--yes", {}),
]
RO_CASES = [
    ("ro-owner-add", ["owner", "add", "Ilse Marrow"]),
    ("ro-owner-rename", ["owner", "rename", "Orla Quenby", "Orla Q"]),
    ("ro-tube-add", ["tube", "add", "T2", "--type", "12AX7"]),
    ("ro-tube-note", ["tube", "note", "T1", "a note"]),
    ("ro-tube-rename", ["tube", "rename", "T1", "T1b"]),
    ("ro-tube-delete", ["tube", "delete", "T1", "--yes"]),
    ("ro-import", ["import", "{dir}/good.csv", "--tube", "T1", "--section", "B", "--at",
                   "2026-03-02T10:00", "--ambient-c", "21"]),
    ("ro-merge", ["merge", "{dir}/template.db"]),
    ("ro-reanalyze", ["reanalyze", "--force"]),
    ("ro-capture", ["capture", "--port", "glowsim://", "--tube", "T1", "--section", "A"]),
]


def _run(argv, capsys):
    try:
        rc = main(argv)
    except SystemExit as e:  # argparse
        rc = e.code
    out, err = capsys.readouterr()
    return rc, out, err


def _one_clear_line(err: str, words: str) -> None:
    assert "Traceback" not in err, err
    lines = [x for x in err.splitlines() if x.strip()]
    message = [x for x in lines if "error:" in x]
    assert len(message) == 1, err  # one line says what is wrong ...
    assert words.lower() in " ".join(err.split()).lower(), err  # ... and says it plainly


def _fill(argv, d, db, uuid):
    return [a.replace("{dir}", str(d)).replace("{db}", str(db)).replace("@uuid", uuid)
            for a in argv]


@pytest.fixture
def case_db(template, tmp_path):
    d, db = template
    copy = tmp_path / "bench.db"
    shutil.copyfile(db, copy)
    uuid = sqlite3.connect(copy).execute("SELECT uuid FROM captures").fetchone()[0]
    return d, copy, uuid


def test_there_are_at_least_80_cases():
    assert len(CASES) + len(RO_CASES) >= 80
    assert len({c[0] for c in CASES} | {c[0] for c in RO_CASES}) == len(CASES) + len(RO_CASES)


@pytest.mark.parametrize("name,argv,status,words,env", CASES, ids=[c[0] for c in CASES])
def test_bad_input_gets_one_clear_line(name, argv, status, words, env, case_db, capsys,
                                       monkeypatch, tmp_path):
    d, db, uuid = case_db
    for k, v in env.items():
        monkeypatch.setenv(k, v.replace("{dir}", str(d)))
    monkeypatch.chdir(tmp_path)
    before = _digest(db)
    argv = _fill(argv, d, db, uuid)
    if "--db" not in argv:
        argv += ["--db", str(db)]
    rc, out, err = _run(argv, capsys)
    assert rc == status, (rc, err)
    _one_clear_line(err, words)
    assert _digest(db) == before  # the logbook is untouched
    assert not list((d / "folder").iterdir())  # nothing written where it should not be


@pytest.fixture
def read_only_db(case_db):
    d, db, uuid = case_db
    if not _read_only(db):
        _writable_again(db)
        pytest.skip("cannot make a file read-only here (neither chmod nor chattr +i works)")
    yield d, db
    _writable_again(db)


@pytest.mark.parametrize("name,argv", RO_CASES, ids=[c[0] for c in RO_CASES])
def test_read_only_logbook_gets_one_clear_line(name, argv, read_only_db, capsys):
    d, db = read_only_db
    before = _digest(db)
    rc, out, err = _run([*_fill(argv, d, db, ""), "--db", str(db)], capsys)
    assert rc == 1, (rc, err)
    _one_clear_line(err, "read-only")
    assert _digest(db) == before


def test_reading_a_read_only_logbook_works(read_only_db, capsys):
    d, db = read_only_db
    for argv in (["list"], ["history", "T1"], ["tube", "list"], ["stock"]):
        rc, out, err = _run([*argv, "--db", str(db)], capsys)
        assert rc == 0, (argv, err)


def test_report_named_after_a_label_stays_in_the_folder(tmp_path, monkeypatch, capsys):
    """A label with separators ("KS/0117", "../x") makes a plain file name in
    the working folder, never a path elsewhere."""
    db = tmp_path / "b.db"
    work = tmp_path / "work"
    work.mkdir()
    monkeypatch.chdir(work)
    for label in ("KS/0117", "../x", "/etc/y", ".hidden"):
        assert main(["tube", "add", label, "--type", "12AX7", "--db", str(db)]) == 0
        rc, out, err = _run(["report", label, "--db", str(db)], capsys)
        assert rc == 0, err
    made = sorted(p.name for p in work.iterdir())
    assert made == ["KS_0117-heater-report.html", "_etc_y-heater-report.html",
                    "_x-heater-report.html", "hidden-heater-report.html"]
    assert sorted(p.name for p in tmp_path.iterdir()) == ["b.db", "work"]
