"""Both decoders over damaged streams (a short run; bench/link_fault_bench.py
runs a million frames and more): no crash, no false accept, and every frame
sent intact after an intact frame is received. A false accept would need a
mutated frame to pass CRC-32 (1 in 2**32 per damaged frame)."""

import json
import os
import subprocess
from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st

from glowtrace.tester import protocol
from glowtrace.tester.link import Link

from linkfuzz import run_host

REPO = Path(__file__).resolve().parent.parent


@settings(max_examples=25, deadline=None)
@given(seed=st.integers(0, 2 ** 32 - 1))
def test_host_decoder_on_damaged_streams(seed):
    c = run_host(seed, 150)
    assert c.crashes == 0, c.errors
    assert c.false_accepts == 0
    assert c.intact_lost == 0
    assert c.accepted >= c.frames - c.mutated - (c.mutated + 1)  # only the damage is lost


@settings(max_examples=200, deadline=None)
@given(noise=st.binary(max_size=3000))
def test_host_decoder_on_arbitrary_bytes_then_a_good_frame(noise):
    link = Link(port=None)
    link.rx.extend(noise + b"\x00" + protocol.pack(protocol.STATUS, 7, b"{}"))
    frames = []
    while (f := link._next_buffered()) is not None:
        frames.append(f)
    assert frames and frames[-1] == protocol.Frame(protocol.STATUS, 7, b"{}")


def test_firmware_decoder_on_damaged_streams(micropython):
    env = dict(os.environ, MICROPYPATH=str(REPO / "firmware"))
    for seed in (1, 2):
        r = subprocess.run([micropython, str(REPO / "tests" / "fw" / "fuzz_frames.py"),
                            str(seed), "1500"], capture_output=True, text=True, env=env,
                           timeout=120)
        assert r.returncode == 0, r.stderr
        c = json.loads(r.stdout)
        assert c["crashes"] == 0 and c["false_accepts"] == 0 and c["intact_lost"] == 0, c
        assert c["mutated"] > 300 and c["accepted"] >= c["frames"] - 2 * c["mutated"] - 1
