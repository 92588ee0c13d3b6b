"""Circuit simulation over a fitted heater model (not a test): run it with the
project's venv,
    .venv/bin/python bench/circuit_bench.py [--repeat 20]
It fits one flashing 12AX7-like curve, then times (CPU, median of repeats)
one simulation of that heater behind a preheat resistor and its bypass, the
whole `softstart` evaluation (the design and a plain switch-on), the
`--recommend` search (both kinds), and a string of six heaters in series
with its remedies (`glowtrace string`, typical models of their types).
Targets: one simulation <= 50 ms, --recommend <= 2 s, a string of six
<= 0.5 s.
"""

import argparse
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from curves import heater  # noqa: E402
from glowtrace.analysis.analyze import analyze_curve  # noqa: E402
from glowtrace.analysis.thermal import ThermalModel  # noqa: E402
from glowtrace.circuits.simulate import Circuit, Heater, simulate  # noqa: E402
from glowtrace.circuits.recommend import recommend  # noqa: E402
from glowtrace.circuits.softstart import evaluate, sim_length  # noqa: E402
from glowtrace.circuits.string import study_string, typical_model  # noqa: E402


def cpu_ms(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.process_time()
        fn()
        times.append(1000 * (time.process_time() - t0))
    return statistics.median(times)


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--repeat", type=int, default=20)
    args = ap.parse_args()
    res = analyze_curve(heater(seed=1, f=0.05), 22.0, None, 6.3, 0.3)
    h = Heater("T", ThermalModel.from_dict(res["thermal_model"]), 6.3, 0.3)
    c = Circuit(6.3, 0.05, 10.0, bypass_s=3.0)
    t_end = sim_length([h], c)
    one = cpu_ms(lambda: simulate(c, [h], t_end), args.repeat)
    both = cpu_ms(lambda: evaluate(c, [h]), args.repeat)
    string = cpu_ms(lambda: simulate(Circuit(6 * 6.3, 0.5, series=True), [h] * 6, t_end),
                    max(3, args.repeat // 4))
    print(f"one heater, preheat resistor and bypass, {t_end:.0f} s simulated: "
          f"{one:.1f} ms CPU (target 50 ms)")
    print(f"softstart evaluation (design and plain switch-on): {both:.1f} ms CPU")
    rec = cpu_ms(lambda: recommend([h], Circuit(6.3, 0.05), "both"), max(3, args.repeat // 5))
    six = ["12BE6", "12BA6", "12AV6", "12BA6", "50C5", "35W4"]
    for t in six:
        typical_model(t)  # built once per type and kept (lru_cache), as in a session
    full = cpu_ms(lambda: study_string("/nonexistent.db", six, 140.0),
                  max(3, args.repeat // 4))
    print(f"six heaters in series: {string:.1f} ms CPU (target 500 ms)")
    print(f"--recommend, series and ramp designs: {rec:.0f} ms CPU (target 2000 ms)")
    print(f"`string` of six with its two remedies: {full:.0f} ms CPU")


if __name__ == "__main__":
    main()
