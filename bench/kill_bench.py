"""Killed mid-write (not a test): run it with the project's venv,
    .venv/bin/python bench/kill_bench.py [--trials 100] [--seed 1]
Each trial starts a command that writes to one logbook (an import, a
capture on the simulated tester, a re-analysis of everything, a merge of
another bench's logbook), kills it with SIGKILL at a random moment, and then
checks the logbook: SQLite's integrity and foreign-key checks, and every
capture committed before the trial still there with its samples. It prints
the counts; what must hold is 0 corrupt logbooks and 0 lost captures.
"""

import argparse
import random
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from glowtrace.analysis.csvio import write_curve  # noqa: E402
from curves import heater  # noqa: E402

GLOWTRACE = str(Path(sys.executable).parent / "glowtrace")


def committed(db: Path) -> set:
    c = sqlite3.connect(db)
    try:
        return {r[0] for r in c.execute(
            "SELECT c.uuid FROM captures c JOIN capture_samples s ON s.capture_uuid = c.uuid")}
    finally:
        c.close()


def check(db: Path, before: set) -> tuple[bool, int]:
    """(intact, captures lost)."""
    c = sqlite3.connect(db)
    try:
        ok = c.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        ok = ok and not c.execute("PRAGMA foreign_key_check").fetchall()
        orphans = c.execute("SELECT count(*) FROM captures c LEFT JOIN capture_samples s "
                            "ON s.capture_uuid = c.uuid WHERE s.capture_uuid IS NULL"
                            ).fetchone()[0]
    finally:
        c.close()
    return ok and orphans == 0, len(before - committed(db))


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--trials", type=int, default=100)
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args()
    r = random.Random(args.seed)
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        env_db = ["--db", str(d / "bench.db")]
        db = d / "bench.db"
        curve = d / "curve.csv"
        write_curve(curve, heater(seed=3, t_end=15.0))
        # another bench's logbook to merge, and a first capture here
        other = d / "other.db"
        for k in range(3):
            subprocess.run([GLOWTRACE, "import", str(curve), "--tube", f"O{k}", "--type",
                            "12AX7", "--section", "A", "--at", f"2026-01-0{k + 1}T10:00",
                            "--ambient-c", "21", "--db", str(other)], check=True,
                           capture_output=True)
        subprocess.run([GLOWTRACE, "import", str(curve), "--tube", "K0", "--type", "12AX7",
                        "--section", "A", "--at", "2026-02-01T10:00", "--ambient-c", "21",
                        *env_db], check=True, capture_output=True)
        jobs = {
            "import": lambda n: ["import", str(curve), "--tube", f"K{n % 7}", "--type",
                                 "12AX7", "--section", "A", "--at",
                                 f"2026-03-01T10:{n // 60 % 60:02d}:{n % 60:02d}",
                                 "--ambient-c", "21"],
            "capture": lambda n: ["capture", "--port", f"glowsim://?seed={n}", "--tube",
                                  f"C{n % 5}", "--type", "12AX7", "--section", "A",
                                  "--max-s", "8"],
            "reanalyze": lambda n: ["reanalyze", "--force"],
            "merge": lambda n: ["merge", str(other)],
        }
        # kill windows, s: from start-up to a little past the usual run time
        windows = {"import": (0.3, 2.0), "capture": (0.5, 5.0), "reanalyze": (0.3, 3.0),
                   "merge": (0.3, 1.5)}
        counts = {k: {"trials": 0, "killed mid-run": 0} for k in jobs}
        corrupt = lost = 0
        t_start = time.perf_counter()
        for n in range(args.trials):
            job = r.choice(list(jobs))
            before = committed(db)
            p = subprocess.Popen([GLOWTRACE, *jobs[job](n), *env_db],
                                 stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            time.sleep(r.uniform(*windows[job]))
            if p.poll() is None:
                p.send_signal(signal.SIGKILL)
                counts[job]["killed mid-run"] += 1
            p.wait()
            counts[job]["trials"] += 1
            ok, gone = check(db, before)
            corrupt += not ok
            lost += gone
            if not ok or gone:
                print(f"trial {n} ({job}): intact={ok}, captures lost={gone}")
        elapsed = time.perf_counter() - t_start
        n_caps = len(committed(db))
    print(f"{args.trials} trials in {elapsed:.0f} s; logbook at the end: {n_caps} captures")
    for job, c in counts.items():
        print(f"  {job:10s} {c['trials']:3d} trials, {c['killed mid-run']:3d} killed mid-run")
    print(f"corrupt logbooks after a kill: {corrupt}; committed captures lost: {lost}")


if __name__ == "__main__":
    main()
