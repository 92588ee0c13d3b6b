"""Tubes per hour of a bench session with 1, 2 and 4 simulated testers side
by side, at real pace (not a test):
    .venv/bin/python bench/session_bench.py [--tubes-per-tester 2] [--type 12BA6]
Each simulated tester runs its heater in real time (pace=1), as a board
would; the session deals the box out to whichever tester is free, writes the
logbook through one writer, and the wall time of the whole box gives tubes
per hour. No prompts (--yes): the handling time of a person inserting tubes
is not in these figures, only the testers' and the host's. 12BA6 is the
default type: its heater settles in a few seconds, so the bench stays short;
a 6V6 or 12AX7 takes 15-30 s a capture and scales the same way."""

import argparse
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))

from glowtrace.procedures import session as ses  # noqa: E402


def box(n_testers: int, per_tester: int, type_name: str) -> tuple[float, int]:
    with tempfile.TemporaryDirectory() as d:
        s = ses.Session(Path(d) / "bench.db",
                        [f"glowsim://?tube={type_name}&pace=1&serial=BENCH{n}&seed={n}"
                         for n in range(1, n_testers + 1)],
                        type_name, pattern=ses.LabelPattern("P-###"),
                        count=n_testers * per_tester, unattended=True)
        t0 = time.monotonic()
        results = ses.run(s, input, lambda _: None)  # unattended: never asks
        wall = time.monotonic() - t0
    return wall, sum(r.outcome == "captured" for r in results)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--tubes-per-tester", type=int, default=2)
    ap.add_argument("--type", default="12BA6")
    a = ap.parse_args()
    print(f"{a.type}, {a.tubes_per_tester} tubes per tester, real pace")
    print(f"{'testers':>7} {'tubes':>6} {'wall s':>7} {'tubes/h':>8} {'vs one':>7}")
    base = None
    for n in (1, 2, 4):
        wall, done = box(n, a.tubes_per_tester, a.type)
        rate = done / wall * 3600
        base = base or rate
        print(f"{n:7d} {done:6d} {wall:7.1f} {rate:8.0f} {rate / base:6.2f}x")
    return 0


if __name__ == "__main__":
    sys.exit(main())
