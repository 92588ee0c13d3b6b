"""False alarms and detection of the history judgement (not a test):
    .venv/bin/python bench/judgement_bench.py [--captures 30] [--tubes 2000]

Stage 1 measures what a realistic bench does to a steady tube's scored
figures, on the real simulated tester (firmware under micropython, the full
analysis): a 12AX7 section captured cold again and again with the supply set
by hand (rated +-2 %), the socket's contact resistance 0.1-0.3 ohm, the room
17-27 C, the converter's noise as simulated and twice it, and now and then a
re-test while still warm (which the analysis must exclude). It also measures
what thinning does to the same figures: the section's resistance raised 2 %.

Stage 2 scores simulated histories with the project's own score_section:
steady tubes (each visit: one stage-1 capture's departures, resampled whole,
so the figures keep their correlation) and tubes that thin 0.5 % a visit after
three steady visits. The noise pooled over a type comes from a logbook of 40
other tubes of the type, as in a shop. Prints the share of steady tubes ever
flagged (drifting, at limit or watch) over 12 visits, and how many visits a
thinning tube takes to be flagged."""

import argparse
import math
import random
import statistics
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from glowtrace import catalogue, config  # noqa: E402
from glowtrace.analysis.analyze import analyze_capture  # noqa: E402
from glowtrace.config import METRICS  # noqa: E402
from glowtrace.judgement import scoring  # noqa: E402
from glowtrace.logbook.store import metric_rows  # noqa: E402
from simhelp import sim_tester  # noqa: E402

FLAGS = ("drifting", "at limit", "watch", "heater fault")
TYPE = "12AX7"


def capture_row(settings: dict) -> dict:
    with sim_tester(tube=TYPE, **settings) as t:
        raw = t.capture("B", "A", {"max_s": 40})
    result = analyze_capture(raw, catalogue.load().get(TYPE))
    return metric_rows(raw.uuid, result["analysis_version"], result, "B", raw.started_at,
                       raw.complete)[0]


def stage1(n: int, rng: random.Random) -> tuple[list[dict], dict, int]:
    """Departures (ln, flash absolute) of n realistic steady captures from
    their mean, the thinning signature per unit of resistance change, and how
    many warm re-tests were wrongly scored."""
    rows, warm_scored = [], 0
    for k in range(n):
        s = {"supply_v": round(6.3 * rng.uniform(0.98, 1.02), 3),
             "contact_ohm": round(rng.uniform(0.1, 0.3), 3),
             "ambient_c": round(rng.uniform(17, 27), 1),
             "adc_noise_lsb": rng.choice([1.5, 3.0]), "seed": 1000 + k}
        warm = k % 10 == 9
        if warm:
            s["preheat_k"] = 400.0
        row = capture_row(s)
        if warm:
            warm_scored += bool(row["scored"])
        elif row["scored"]:
            rows.append(row)
        print(f"  capture {k + 1}/{n}: {'warm, ' if warm else ''}"
              f"{'scored' if row['scored'] else 'excluded: ' + str(row['excluded'])}",
              file=sys.stderr)
    means = {m: statistics.fmean(_y(m, r[m]) for r in rows) for m in METRICS}
    departures = [{m: _y(m, r[m]) - means[m] for m in METRICS} for r in rows]
    # thinning: the same conditions, the section's resistance 2 % higher
    sig = {m: [] for m in METRICS}
    for k in range(2):
        base = {"supply_v": 6.3, "contact_ohm": 0.2, "ambient_c": 22.0, "seed": 50 + k}
        a = capture_row(base)
        b = capture_row(dict(base, section_a=round(0.15 / 1.02, 6)))
        for m in METRICS:
            sig[m].append((_y(m, b[m]) - _y(m, a[m])) / 0.02)
    return departures, {m: statistics.fmean(v) for m, v in sig.items()}, warm_scored


def _y(m, v):
    return v if m == "flash_index" else math.log(v)


def _x(m, y):
    return y if m == "flash_index" else math.exp(y)


TRUE = {"cold_resistance_20c_ohm": 6.2, "rated_hot_current_a": 0.15, "rated_inrush_ratio": 6.8,
        "rated_warmup_90_s": 10.0, "rated_settle_1pct_s": 20.0, "series_warmup_s": 23.0,
        "flash_index": 0.0}


def history_rows(departures, visits, rng, thinning=None, start=3):
    rows = []
    for v in range(visits):
        d = rng.choice(departures)
        drift = (v - start + 1) * thinning if thinning and v >= start else 0.0
        row = {"capture_uuid": f"u{v}", "at": f"2026-{1 + v // 28:02d}-{1 + v % 28:02d}T09:00:00",
               "version": scoring.ANALYSIS_VERSION, "scored": 1, "excluded": None,
               "hot_current_a": 0.15, "inrush_ratio": 6.0, "warmup_90_s": 10.0,
               "settle_1pct_s": 20.0}
        for m in METRICS:
            row[m] = _x(m, _y(m, TRUE[m]) + d[m] + drift * SIGNATURE[m])
        rows.append(row)
    return rows


def first_flag(rows, cfg, noise):
    for v in range(cfg["baseline"]["count"] + 1, len(rows) + 1):
        if scoring.score_section(rows[:v], cfg, "A", None, noise)["status"] in FLAGS:
            return v
    return None


SIGNATURE: dict = {}


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--captures", type=int, default=30, help="stage 1 simulated captures")
    ap.add_argument("--tubes", type=int, default=2000, help="stage 2 tubes of each kind")
    ap.add_argument("--visits", type=int, default=12)
    args = ap.parse_args()
    rng = random.Random(11)
    cfg = config.load()
    t0 = time.monotonic()
    departures, signature, warm_scored = stage1(args.captures, rng)
    SIGNATURE.update(signature)
    print(f"stage 1: {len(departures)} scored steady captures in {time.monotonic() - t0:.0f} s; "
          f"warm re-tests scored by mistake: {warm_scored}")
    print("  metric                      realistic sd    floor   thinning, per 1 % of R")
    for m in METRICS:
        sd = statistics.pstdev(d[m] for d in departures)
        print(f"  {m:26s} {sd:10.4f} {cfg['noise_floor'][m]:9.4f} {signature[m] / 100:+12.4f}")
    # a shop's logbook: 40 other tubes of the type, three visits each
    shop = [history_rows(departures, 3, rng) for _ in range(40)]
    noise = scoring.type_noise(shop, cfg)
    print("  pooled noise from 40 tubes x 3 visits: "
          + ", ".join(f"{m} {v:.4f}" for m, v in noise.items() if v is not None))
    t1 = time.monotonic()
    steady = [first_flag(history_rows(departures, args.visits, rng), cfg, noise)
              for _ in range(args.tubes)]
    flagged = sum(v is not None for v in steady)
    thin = [first_flag(history_rows(departures, args.visits, rng, thinning=0.005), cfg, noise)
            for _ in range(args.tubes)]
    after = [v - 3 for v in thin if v is not None]
    within4 = sum(1 for v in after if v <= 4)
    print(f"stage 2 ({time.monotonic() - t1:.0f} s): steady tubes ever flagged over "
          f"{args.visits} visits: {flagged}/{args.tubes} = {100 * flagged / args.tubes:.1f} % "
          f"(goal <= 2 %)")
    print(f"  thinning 0.5 %/visit after 3 steady visits: flagged within 4 visits "
          f"{within4}/{args.tubes} = {100 * within4 / args.tubes:.1f} %; median "
          f"{statistics.median(after) if after else float('nan')} visits; never "
          f"{args.tubes - len(after)}")


if __name__ == "__main__":
    main()
