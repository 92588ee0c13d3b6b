"""History-scoring benchmark (not a test):
    .venv/bin/python bench/history_bench.py [--tubes 1000,10000,100000] [--per-tube 10]
                                            [--samples]
For each fleet size, builds a logbook of tubes x captures in a temporary
folder, then prints the time to assess one tube (median of 50 tubes, each in
a fresh connection, as one `glowtrace history` would; the first of them after
the build pays for the type's figures, the rest read them kept), and the
whole fleet, and the database size: the growth with the fleet is visible.

Each capture row is stored as glowtrace stores one: its capture record, its
analysis document and its section_metrics row, and with --samples one real
compressed capture's samples (reused, so the size is realistic). Metric values are drawn around a 12AX7-like heater with
noise, some tubes drifting, some captures warm."""

import argparse
import json
import os
import random
import statistics
import sys
import tempfile
import time
import uuid as uuidlib
from datetime import datetime, timedelta, timezone
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from glowtrace import config  # noqa: E402
from glowtrace.analysis import ANALYSIS_VERSION  # noqa: E402
from glowtrace.judgement import scoring  # noqa: E402
from glowtrace.logbook import samples_codec  # noqa: E402
from glowtrace.logbook.store import Store, metric_rows  # noqa: E402

TYPES = [("12AX7", 6.2, 0.15), ("12AU7", 6.4, 0.15), ("EL84", 1.3, 0.76), ("6V6", 2.4, 0.45)]


def sample_blob() -> tuple[bytes, bytes]:
    from simhelp import sim_tester
    with sim_tester(seed=1) as t:
        raw = t.capture("B", "A", {})
    return samples_codec.encode(raw.blocks)


def analysis_doc(r20, i_hot, flash, warm, ambient):
    m = {"peak_current_a": i_hot * 6.7, "cold_resistance_ohm": r20 * 1.009,
         "cold_resistance_20c_ohm": r20, "hot_current_a": i_hot,
         "hot_resistance_ohm": 6.3 / i_hot, "hot_power_w": 6.3 * i_hot,
         "hot_cold_ratio": 6.3 / i_hot / r20, "inrush_ratio": 6.7,
         "warmup_50_s": 2.6, "warmup_90_s": 9.9 * (1 + flash), "settle_1pct_s": 16.7,
         "cold_start_ok": not warm, "flash_index": flash,
         "rated_peak_current_a": 6.3 / r20, "rated_warmup_90_s": 10.1,
         "series_warmup_s": 23.5, "rated_volts": 6.3, "rated_amps": i_hot,
         "ambient_c": ambient, "warnings": ["not a cold start: still warm"] if warm else [],
         "analysis_version": ANALYSIS_VERSION,
         "thermal_model": {"r20": r20, "k": 1.0, "t_amb_k": ambient + 273.15,
                           "r_hot": 42.0, "p_hot": 0.95, "dt_ws": 149.0, "tau_w": 0.5,
                           "tau_s": 3.5, "f": flash, "tau_x": 0.12, "fit_rms": 0.8,
                           "fit_evaluations": 5, "model": "wire-sleeve-exposed/1"}}
    return {"analysis_version": ANALYSIS_VERSION, "sections": {"A": m}, "section_imbalance": None}


def build(db_path: Path, n_tubes: int, per_tube: int, samples: bool) -> float:
    rnd = random.Random(4)
    blocks, blob = sample_blob() if samples else (b"", b"")
    t0 = time.perf_counter()
    store = Store(db_path)
    conn = store.db.conn
    start = datetime(2024, 1, 1, tzinfo=timezone.utc)
    now = datetime.now(timezone.utc).isoformat()
    with store.transaction():
        for n in range(n_tubes):
            tname, r20_0, i_0 = TYPES[n % len(TYPES)]
            label = f"BN-{n:05d}"
            conn.execute("INSERT INTO tubes (label, type, notes, created_at) VALUES (?,?,?,?)",
                         [label, tname, None, now])
            r20 = r20_0 * rnd.gauss(1, 0.02)
            drift = 0.01 if n % 10 == 0 else 0.0
            caps, smp, ana, met = [], [], [], []
            for k in range(per_tube):
                u = str(uuidlib.UUID(int=rnd.getrandbits(128)))
                at = (start + timedelta(days=35 * k + rnd.random())).isoformat()
                amb = rnd.uniform(18, 26)
                warm = rnd.random() < 0.05
                rr = r20 * (1 + drift * k) * rnd.gauss(1, 0.002)
                doc = analysis_doc(rr, i_0 * (r20_0 / rr) ** 0.5, 0.003 * k if drift else 0.0,
                                   warm, amb)
                caps.append([u, label, "A", at, now, 1, None, "settled", None, "sim-0001",
                             "0.1.0", "glowsim://", amb, 11500, 260, "{}", "{}", "[]", "{}",
                             "null", "{}", "tester"])
                smp.append([u, samples_codec.ENCODING, '["ia","ib","v"]', 11500, blocks, blob])
                ana.append([u, ANALYSIS_VERSION, now, json.dumps(doc)])
                met += metric_rows(u, ANALYSIS_VERSION, doc, label, at, True)
            conn.executemany("INSERT INTO captures VALUES (" + ",".join("?" * 23) + ")",
                             [c + [None] for c in caps])
            conn.executemany("INSERT INTO capture_samples VALUES (?,?,?,?,?,?)", smp)
            conn.executemany("INSERT INTO analyses VALUES (?,?,?,?)", ana)
            names = list(met[0])
            conn.executemany(f"INSERT INTO section_metrics ({', '.join(names)}) VALUES "
                             f"({', '.join('?' * len(names))})", [list(r.values()) for r in met])
            if n % 1000 == 999:
                print(f"  built {n + 1} tubes", file=sys.stderr)
    store.close()
    return time.perf_counter() - t0


def one_size(n_tubes: int, per_tube: int, samples: bool, cfg: dict) -> dict:
    with tempfile.TemporaryDirectory() as d:
        db = Path(d) / "fleet.db"
        built = build(db, n_tubes, per_tube, samples)
        size = os.path.getsize(db)
        times = []
        picks = random.Random(1).sample(range(n_tubes), min(50, n_tubes))
        drifting = 0
        for p in picks:
            t0 = time.perf_counter()
            with Store(db) as store:
                r = scoring.assess_tube(store, f"BN-{p:05d}", cfg)
            times.append(time.perf_counter() - t0)
            drifting += r["drifting"]
        with Store(db) as store:
            t0 = time.perf_counter()
            fleet = scoring.assess_fleet(store, cfg)
            elapsed = time.perf_counter() - t0
        return {"tubes": n_tubes, "captures": n_tubes * per_tube, "mb": size / 1e6,
                "built_s": built, "first_ms": 1000 * times[0],
                "one_ms": 1000 * statistics.median(times[1:]),
                "fleet_s": elapsed, "fleet_drifting": sum(f["drifting"] for f in fleet)}


def main():
    ap = argparse.ArgumentParser(description="history scoring benchmark")
    ap.add_argument("--tubes", default="1000,10000,100000",
                    help="fleet sizes, comma-separated")
    ap.add_argument("--per-tube", type=int, default=10)
    ap.add_argument("--samples", action="store_true", help="store raw samples too (size)")
    args = ap.parse_args()
    cfg = config.load(ROOT / "host" / "glowtrace" / "data" / "scoring.toml")
    print("tubes    captures   logbook   one tube (first / kept)   fleet     per tube")
    for n in (int(x) for x in args.tubes.split(",")):
        r = one_size(n, args.per_tube, args.samples, cfg)
        print(f"{r['tubes']:>7,} {r['captures']:>10,} {r['mb']:>7.0f} MB "
              f"{r['first_ms']:>9.1f} / {r['one_ms']:.2f} ms {r['fleet_s']:>11.2f} s "
              f"{1e6 * r['fleet_s'] / r['tubes']:>7.0f} us   ({r['fleet_drifting']} drifting; "
              f"built in {r['built_s']:.0f} s)", flush=True)


if __name__ == "__main__":
    main()
