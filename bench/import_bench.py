"""A very large curve through `glowtrace import` (not a test): run it with
the project's venv,
    .venv/bin/python bench/import_bench.py [--rows 10000000]
It writes a CSV curve of that many rows (a heater start-up sampled at a
uniform rate), imports it in a child process, and prints the wall time, the
child's peak memory (max RSS), the stored size, and the longest time the
logbook's write lock was held, as seen by a second process that tries to
take it every 20 ms.
"""

import argparse
import os
import resource
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
GLOWTRACE = str(Path(sys.executable).parent / "glowtrace")


def write_csv(path: Path, rows: int) -> None:
    """A first-order heater (6 -> 42 ohm, tau 1.5 s) at 6.3 V over 30 s."""
    chunk = 1_000_000
    with open(path, "w") as f:
        f.write("time_s,volts,amps\n")
        for start in range(0, rows, chunk):
            k = np.arange(start, min(rows, start + chunk))
            t = -0.05 + 30.05 * k / rows
            r = np.where(t >= 0, 42.0 - 36.0 * np.exp(-np.clip(t, 0, None) / 1.5), np.inf)
            i = 6.3 / r
            np.savetxt(f, np.column_stack([t, np.full_like(t, 6.3), i]), fmt="%.9g",
                       delimiter=",")


def lock_watch(db: Path, stop: threading.Event, out: dict) -> None:
    longest = 0.0
    held_since = None
    while not stop.is_set():
        c = sqlite3.connect(db, timeout=0, isolation_level=None)
        try:
            c.execute("BEGIN IMMEDIATE")
            c.execute("ROLLBACK")
            if held_since is not None:
                longest = max(longest, time.monotonic() - held_since)
                held_since = None
        except sqlite3.OperationalError:
            held_since = held_since or time.monotonic()
        finally:
            c.close()
        time.sleep(0.02)
    out["longest_lock_s"] = longest


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=10_000_000)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory() as d:
        d = Path(d)
        csv_path, db = d / "big.csv", d / "bench.db"
        t0 = time.perf_counter()
        write_csv(csv_path, args.rows)
        print(f"wrote {args.rows:,} rows ({csv_path.stat().st_size / 1e6:,.0f} MB) in "
              f"{time.perf_counter() - t0:.0f} s")
        subprocess.run([GLOWTRACE, "tube", "add", "BIG", "--type", "12AX7", "--db", str(db)],
                       check=True, capture_output=True)
        stop, seen = threading.Event(), {}
        watcher = threading.Thread(target=lock_watch, args=(db, stop, seen))
        watcher.start()
        t0 = time.perf_counter()
        r = subprocess.run([GLOWTRACE, "import", str(csv_path), "--tube", "BIG", "--section",
                            "A", "--at", "2026-03-01T10:00", "--ambient-c", "21",
                            "--db", str(db), "--json"], capture_output=True, text=True)
        wall = time.perf_counter() - t0
        stop.set()
        watcher.join()
        peak_mb = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
        if r.returncode:
            print("import failed:", r.stderr)
            return
        stored = sqlite3.connect(db).execute(
            "SELECT length(samples) FROM capture_samples").fetchone()[0]
    print(f"import: {wall:.0f} s wall, peak memory {peak_mb:,.0f} MB, stored "
          f"{stored / 1e6:,.1f} MB ({stored / (args.rows * 24):.0%} of the float64 rows), "
          f"write lock held at most {seen['longest_lock_s']:.2f} s at a time")


if __name__ == "__main__":
    os.environ.setdefault("COLUMNS", "120")
    main()
