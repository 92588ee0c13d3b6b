"""Capture-path benchmark (not a test): run it with the project's venv,
    .venv/bin/python bench/capture_bench.py [--runs N]
and it prints, for the simulated tester and a 12AX7 section-pair capture:
  - wall time of one simulated capture (firmware under micropython),
  - bytes on the link per capture,
  - host decode-and-store time per capture (frames replayed from memory),
  - database bytes per capture (raw samples and the whole file),
  - for one single-section and one dual-section capture: the samples as
    stored (FLAC per phase) beside the older LZMA encoding and beside the
    order-0 entropy of the residuals of a least-squares linear predictor
    (order 8, per phase and channel): what a predictive coder can hope for.
"""

import argparse
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "host"))
sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from glowtrace.tester import protocol  # noqa: E402
from glowtrace.tester.raw import RawCapture  # noqa: E402
from glowtrace.tester.link import Link  # noqa: E402
from glowtrace.logbook.store import Store  # noqa: E402
from glowtrace.tester.driver import Tester  # noqa: E402
from glowtrace.tester.transport import open_port  # noqa: E402
from simhelp import WrappedPort  # noqa: E402

URL = "glowsim://?tube=12AX7&flash_b=0.1"


class RecordingPort(WrappedPort):
    """Wraps a serial port and keeps every byte read from it."""

    def __init__(self, port):
        super().__init__(port)
        self.record = bytearray()

    def read(self, n):
        data = self.port.read(n)
        self.record.extend(data)
        return data


def decode_and_store(stream: bytes, hello: dict, store: Store) -> float:
    """Host-side work for one capture, from link bytes to a committed row."""
    t0 = time.perf_counter()
    link = Link(None)
    link.rx.extend(stream)
    raw = RawCapture(tube="BENCH", section="AB", port="replay", hello=hello)
    while True:
        f = link._next_buffered()
        if f is None:
            break
        if f.mtype == protocol.BLOCK:
            raw.blocks.append(protocol.Block.parse(f.body))
        elif f.mtype == protocol.CAPTURE_START:
            start = f.json()
            raw.params, raw.channels = start["params"], start["channels"]
        elif f.mtype == protocol.CAPTURE_END:
            raw.end = f.json()
    raw.link = link.stats.as_dict()
    assert raw.check_whole() is None, raw.check_whole()
    store.save_capture(raw)
    return time.perf_counter() - t0


def lpc_entropy_bytes(raw, order: int = 8) -> float:
    """Order-0 entropy (bytes) of the residuals of a least-squares linear
    predictor of the given order, fitted per phase and channel, integer-
    rounded as a lossless coder would use it; the first `order` sets of a
    phase counted at 16 bits."""
    import numpy as np
    bits = 0.0
    for phase in sorted({b.phase for b in raw.blocks}):
        bl = sorted((b for b in raw.blocks if b.phase == phase), key=lambda b: b.t_start_us)
        a = np.concatenate([np.frombuffer(b.data, "<u2").reshape(-1, b.n_channels)
                            for b in bl]).astype(float)
        for x in a.T:
            if len(x) <= 2 * order:
                bits += 16 * len(x)
                continue
            past = np.column_stack([x[order - k - 1:len(x) - k - 1] for k in range(order)])
            coef, *_ = np.linalg.lstsq(past, x[order:], rcond=None)
            r = np.round(x[order:] - past @ coef).astype(np.int64)
            _, counts = np.unique(r, return_counts=True)
            p = counts / counts.sum()
            bits += float(-(p * np.log2(p)).sum()) * len(r) + 16 * order
    return bits / 8


def storage_report():
    from glowtrace.logbook import samples_codec
    from simhelp import sim_tester
    print("stored samples per capture (12AX7; bytes): FLAC per phase + block table | older "
          "LZMA encoding | entropy of LPC-8 residuals")
    for section in ("A", "AB"):
        with sim_tester(tube="12AX7", seed=4) as t:
            raw = t.capture("BENCH", section, {})
        meta, smp = samples_codec.encode(raw.blocks)
        old_meta, old_smp = samples_codec.encode_planes(raw.blocks)
        print(f"  section {section:2}: {len(smp):,} + {len(meta):,} = {len(smp) + len(meta):,} | "
              f"{len(old_smp) + len(old_meta):,} | {lpc_entropy_bytes(raw):,.0f} "
              f"({raw.n_sets} sets x {len(raw.channels)} channels, raw "
              f"{raw.n_sets * len(raw.channels) * 2:,})")


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--runs", type=int, default=5)
    args = ap.parse_args()
    starts, walls, link_bytes, host_s, sample_bytes = [], [], [], [], []
    with tempfile.TemporaryDirectory() as d:
        db = Path(d) / "bench.db"
        with Store(db) as store:
            for run in range(args.runs):
                # a fresh simulated tester per run: every capture a cold start
                t0 = time.perf_counter()
                port = RecordingPort(open_port(URL + f"&seed={run + 1}"))
                tester = Tester(Link(port), URL)
                hello = tester.identify()
                starts.append(time.perf_counter() - t0)
                port.record.clear()
                t0 = time.perf_counter()
                raw = tester.capture("BENCH", "AB", {"max_s": 60})
                walls.append(time.perf_counter() - t0)
                port.close()
                link_bytes.append(len(port.record))
                host_s.append(decode_and_store(bytes(port.record), hello, store))
                sample_bytes.append(store.db.execute(
                    "SELECT length(samples) + length(blocks) FROM capture_samples "
                    "ORDER BY rowid DESC LIMIT 1").fetchone()[0])
            n = store.db["captures"].count
        file_bytes = os.path.getsize(db)
    print(f"captures: {args.runs} x 12AX7 both sections, ended "
          f"'{raw.end_reason}' after {raw.end['off_us'] / 1e6:.1f} s of heater time, "
          f"{raw.n_sets} sets x {len(raw.channels)} channels")
    print(f"simulated capture wall time: median {statistics.median(walls):.3f} s "
          f"(min {min(walls):.3f}, max {max(walls):.3f})")
    print(f"simulator start and handshake: median {statistics.median(starts):.3f} s")
    print(f"bytes on the link per capture: {statistics.median(link_bytes):,.0f}")
    print(f"host decode-and-store per capture: median "
          f"{1000 * statistics.median(host_s):.1f} ms")
    print(f"database bytes per capture: samples {statistics.median(sample_bytes):,.0f}, "
          f"whole file {file_bytes / n:,.0f} ({n} captures in {file_bytes:,} bytes)")
    raw_bytes = raw.n_sets * len(raw.channels) * 2
    print(f"raw sample payload {raw_bytes:,} bytes -> stored "
          f"{statistics.median(sample_bytes) / raw_bytes:.0%}")
    storage_report()


if __name__ == "__main__":
    main()
