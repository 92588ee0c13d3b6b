"""Link faults (not a test): run it with the project's venv,
    .venv/bin/python bench/link_fault_bench.py [--host-frames N] [--fw-frames N]
        [--captures N]
and it prints counts for
  1. the host's decoder over damaged frame streams (default 1,000,000 frames),
  2. the firmware's decoder under micropython (default 400,000 frames),
  3. captures on the simulated tester through a port that drops, flips and
     inserts bytes, a host that stalls for 3 s, and a tester that vanishes:
     how each capture was stored, and whether the heater was confirmed off.
What must hold: 0 crashes and 0 false accepts in 1 and 2; in 3 every
capture is stored (whole, or marked incomplete with its reason), none is
taken for whole with a hole in it, and the heater is off.
"""

import argparse
import json
import os
import random
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from glowtrace import paths  # noqa: E402
from glowtrace.errors import GlowtraceError  # noqa: E402
from glowtrace.logbook.store import Store  # noqa: E402
from glowtrace.procedures.capture import mark_bench_trip, store_or_keep  # noqa: E402
from glowtrace.tester.driver import CaptureInterrupted, Tester  # noqa: E402
from glowtrace.tester.link import Link  # noqa: E402
from glowtrace.tester.transport import open_port  # noqa: E402
from linkfuzz import FuzzCounts, run_host  # noqa: E402
from simhelp import WrappedPort  # noqa: E402

BATCH = 2000
FW_BATCH = 5000


def _host_batch(seed: int) -> FuzzCounts:
    return run_host(seed, BATCH)


def host_fuzz(frames: int) -> FuzzCounts:
    total = FuzzCounts()
    with ProcessPoolExecutor(os.cpu_count() or 1) as pool:
        for c in pool.map(_host_batch, range(max(1, frames // BATCH))):
            total.add(c)
    return total


def _fw_batch(seed: int) -> dict:
    env = dict(os.environ, MICROPYPATH=str(ROOT / "firmware"))
    r = subprocess.run([paths.micropython_executable(), str(ROOT / "tests/fw/fuzz_frames.py"),
                        str(seed), str(FW_BATCH)], capture_output=True, text=True, env=env)
    if r.returncode:
        return {"crashes": 1, "errors": [r.stderr[-300:]]}
    return json.loads(r.stdout)


def fw_fuzz(frames: int) -> dict:
    total: dict = {}
    with ProcessPoolExecutor(os.cpu_count() or 1) as pool:
        for c in pool.map(_fw_batch, range(1000, 1000 + max(1, frames // FW_BATCH))):
            for k, v in c.items():
                total[k] = total.get(k, 0 if k != "errors" else []) + v
    return total


class FaultyPort(WrappedPort):
    """A serial port whose incoming bytes are damaged: each byte dropped,
    flipped or followed by a stray byte with the given probabilities; or the
    host stalls (reads nothing, sends nothing) once for `stall_s`; or the
    tester vanishes (its process killed) after `vanish_s`."""

    def __init__(self, port, seed, drop=0.0, flip=0.0, insert=0.0, stall_s=0.0,
                 stall_at_s=0.5, vanish_s=None):
        super().__init__(port)
        self.r = random.Random(seed)
        self.drop, self.flip, self.insert = drop, flip, insert
        self.stall_s, self.stall_at_s, self.vanish_s = stall_s, stall_at_s, vanish_s
        self.t0 = None
        self.damaged = 0
        self.armed = False  # faults start with the capture, after the handshake

    def _clock(self):
        if not self.armed:
            return
        if self.t0 is None:
            self.t0 = time.monotonic()
        el = time.monotonic() - self.t0
        if self.stall_s and el >= self.stall_at_s:
            time.sleep(self.stall_s)  # the whole host stops: no reads, no heartbeats
            self.stall_s = 0.0
        if self.vanish_s is not None and el >= self.vanish_s:
            self.port.sim.proc.kill()
            self.vanish_s = None

    def read(self, n):
        self._clock()
        data = self.port.read(n)
        if not self.armed or not (self.drop or self.flip or self.insert) or not data:
            return data
        out = bytearray()
        for b in data:
            x = self.r.random()
            if x < self.drop:
                self.damaged += 1
                continue
            if x < self.drop + self.flip:
                b ^= 1 << self.r.randrange(8)
                self.damaged += 1
            out.append(b)
            if self.r.random() < self.insert:
                out.append(self.r.randrange(256))
                self.damaged += 1
        return bytes(out)


FAULTS = {
    "none": {},
    "drop 1e-4": {"drop": 1e-4},
    "flip 1e-4": {"flip": 1e-4},
    "insert 1e-4": {"insert": 1e-4},
    "all three 1e-3": {"drop": 1e-3, "flip": 1e-3, "insert": 1e-3},
    "host stalls 3 s": {"stall_s": 3.0},
    "tester vanishes": {"vanish_s": 0.3},
}


def capture_faults(runs: int) -> dict:
    out = {}
    with tempfile.TemporaryDirectory() as d:
        store = Store(Path(d) / "faults.db")
        for name, fault in FAULTS.items():
            counts = {"whole": 0, "incomplete": 0, "whole with damage": 0, "off confirmed": 0,
                      "off unconfirmed": 0, "errors": 0, "reasons": {}}
            for run in range(runs):
                pace = "&pace=1" if "stall" in name or "vanish" in name else ""
                port = FaultyPort(open_port(f"glowsim://?tube=12AX7&seed={run + 1}{pace}"),
                                  run, **fault)
                tester = Tester(Link(port), "glowsim://")
                try:
                    tester.identify()
                    port.armed = True
                    try:
                        raw = tester.capture(f"F{run}", "A", {"max_s": 20, "range": "low"})
                    except CaptureInterrupted as e:
                        raw, raw.incomplete_reason = e.raw, e.reason
                    mark_bench_trip(raw)  # as `glowtrace capture` does
                    store_or_keep(store, raw, "12AX7", None, 10.0)
                    if raw.complete:
                        counts["whole"] += 1
                        counts["whole with damage"] += bool(raw.link.get("bad_frames")
                                                            or raw.link.get("lost_frames"))
                    else:
                        counts["incomplete"] += 1
                        why = raw.incomplete_reason.split(":")[0][:40]
                        counts["reasons"][why] = counts["reasons"].get(why, 0) + 1
                    off = tester.ensure_off() if port.port.sim.alive() else True
                    counts["off confirmed" if off else "off unconfirmed"] += 1
                except GlowtraceError as e:
                    counts["errors"] += 1
                    counts["reasons"][str(e)[:40]] = counts["reasons"].get(str(e)[:40], 0) + 1
                finally:
                    port.port.close()
            out[name] = counts
        store.close()
    return out


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--host-frames", type=int, default=1_000_000)
    ap.add_argument("--fw-frames", type=int, default=400_000)
    ap.add_argument("--captures", type=int, default=4, help="captures per link fault")
    args = ap.parse_args()

    for name, run, n in (("host decoder", host_fuzz, args.host_frames),
                         ("firmware decoder (micropython)", fw_fuzz, args.fw_frames)):
        t0 = time.perf_counter()
        c = run(n)
        c = vars(c) if isinstance(c, FuzzCounts) else c
        print(f"{name}: {c.get('frames', 0):,} frames ({c.get('mutated', 0):,} damaged) in "
              f"{time.perf_counter() - t0:.0f} s: {c.get('accepted', 0):,} accepted, "
              f"{c.get('bad_frames', 0):,} counted bad, {c.get('false_accepts', 0)} false "
              f"accepts, {c.get('intact_lost', 0)} intact frames lost, "
              f"{c.get('crashes', 0)} crashes {c.get('errors') or ''}")

    print(f"captures on the simulated tester through a damaged link ({args.captures} each):")
    for name, c in capture_faults(args.captures).items():
        print(f"  {name:16s} whole {c['whole']} (of them with damage {c['whole with damage']}), "
              f"incomplete {c['incomplete']}, errors {c['errors']}; heater off confirmed "
              f"{c['off confirmed']}, unconfirmed {c['off unconfirmed']}  {c['reasons']}")


if __name__ == "__main__":
    main()
