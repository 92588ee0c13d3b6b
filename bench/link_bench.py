"""Link-use benchmark (not a test):
    .venv/bin/python bench/link_bench.py
Runs captures on the simulated tester (the real firmware under micropython)
with its link log on: the board writes down its own clock and the bytes of
every write to the link. Prints, for a dual-section 12AX7 on three channels
and with the light channel as a fourth: bytes per capture, the busiest 100 ms
and 500 ms (sustained) windows in kB/s, and the framing's share of the bytes
(everything that is not a sample). Goal: sustained <= 50 kB/s, worst 100 ms
<= 80 kB/s. These are the figures PROTOCOL.md quotes."""

import sys
import tempfile
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from simhelp import sim_tester  # noqa: E402


def busiest(t_us: np.ndarray, nbytes: np.ndarray, window_us: float) -> float:
    """Most bytes in any window of that length starting at a write, kB/s."""
    ends = np.searchsorted(t_us, t_us + window_us, side="left")
    c = np.concatenate([[0], np.cumsum(nbytes)])
    return float((c[ends] - c[np.arange(len(t_us))]).max()) / (window_us / 1e6) / 1000


def measure(**sim) -> dict:
    with tempfile.TemporaryDirectory() as d:
        log = Path(d) / "link.log"
        with sim_tester(tube="12AX7", seed=3, link_log=str(log), **sim) as t:
            log.write_text("")  # the capture only, not the greeting
            raw = t.capture("B", "AB", {})
        rows = np.loadtxt(log, dtype=np.int64, ndmin=2)
    t_us, nbytes = rows[:, 0], rows[:, 1]
    samples = sum(len(b.data) for b in raw.blocks)
    total = int(nbytes.sum())
    return {"channels": len(raw.channels), "bytes": total,
            "seconds": raw.end["off_us"] / 1e6,
            "worst_100ms": busiest(t_us, nbytes, 1e5), "sustained_500ms": busiest(t_us, nbytes, 5e5),
            "framing": 1 - samples / total}


def main():
    print(f"{'channels':>8} {'capture':>9} {'kB':>7} {'worst 100 ms':>13} {'worst 500 ms':>13} "
          f"{'framing':>8}")
    for sim in ({}, {"light": 1}):
        r = measure(**sim)
        print(f"{r['channels']:>8} {r['seconds']:>7.1f} s {r['bytes'] / 1000:>7.1f} "
              f"{r['worst_100ms']:>8.1f} kB/s {r['sustained_500ms']:>8.1f} kB/s "
              f"{100 * r['framing']:>7.1f} %", flush=True)


if __name__ == "__main__":
    main()
