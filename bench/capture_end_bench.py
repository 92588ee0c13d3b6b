"""Capture-length benchmark (not a test):
    .venv/bin/python bench/capture_end_bench.py [--types 12AX7,EL34,...]
For each heater preset of the simulated tester: the 1 % settling time of its
current, from a long reference capture (the firmware's end rule made
unreachable, 120 s), beside the length of a capture with the default end
rule, and their ratio (goal: at most 1.1; never below 1, which would be
ending early). Also says whether the default capture's own analysis found
the 1 % settling (a capture cut too short cannot)."""

import argparse
import json
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from glowtrace import catalogue  # noqa: E402
from glowtrace.analysis.analyze import analyze_capture  # noqa: E402
from glowtrace.tester.sockets import range_for  # noqa: E402
from simhelp import sim_tester  # noqa: E402


def settle_and_length(tube: str, section: str, params: dict, seed: int):
    kind = catalogue.load().get(tube)
    with sim_tester(tube=tube, seed=seed) as t:
        raw = t.capture("B", section, dict(params, range=range_for(kind, t.hello["frontend"])))
    a = analyze_capture(raw, kind)["sections"]["A"]
    return a.get("settle_1pct_s"), raw.end["off_us"] / 1e6, raw.end["reason"]


def main():
    sims = json.loads((ROOT / "fixtures_hw" / "sim_tubes.json").read_text())
    ap = argparse.ArgumentParser(description="capture length against the physics")
    ap.add_argument("--types", default=",".join(k for k in sims if not k.startswith("_")))
    ap.add_argument("--seed", type=int, default=5)
    args = ap.parse_args()
    print(f"{'type':8} {'1 % settle (ref)':>17} {'capture':>9} {'ratio':>6}  end      "
          "own analysis")
    ratios = []
    for tube in args.types.split(","):
        ref, ref_len, _ = settle_and_length(tube, "A", {"max_s": 120, "settle_band": 1e-6},
                                            args.seed)
        own, length, reason = settle_and_length(tube, "A", {}, args.seed)
        ratio = length / ref
        ratios.append(ratio)
        print(f"{tube:8} {ref:>15.2f} s {length:>7.2f} s {ratio:>6.2f}  {reason:8} "
              + (f"settles at {own:.2f} s" if own else "NOT SETTLED (ended early)"),
              flush=True)
    print(f"ratio: {min(ratios):.2f} to {max(ratios):.2f} (goal <= 1.1, >= 1)")


if __name__ == "__main__":
    main()
