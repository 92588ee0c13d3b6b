# The firmware's decoder (glowfw.frames.Deframer) over damaged frame streams,
# run under micropython: `micropython fuzz_frames.py SEED N` prints one JSON
# line of counts (the same counts as tests/linkfuzz.py). No crash and no
# false accept may ever show; every frame sent intact after an intact frame
# must be received.
import gc
import json
import random
import sys

from glowfw import frames
from glowfw.crc import crc32

TYPES = (0x81, 0x82, 0x83, 0x84, 0x85, 0x86, 0x87, 0x88, 0x01, 0x11)


def rbytes(n):
    return bytes(random.getrandbits(8) for _ in range(n))


def mutate(f):
    k = random.getrandbits(16) % max(1, len(f))
    op = random.getrandbits(8) % 7
    if op == 0:
        return f[:k] + bytes([f[k] ^ (1 << (random.getrandbits(3)))]) + f[k + 1:]
    if op == 1:
        return f[:k] + f[k + 1:]
    if op == 2:
        return f[:k] + rbytes(1) + f[k:]
    if op == 3:
        return f[:k] + rbytes(1) + f[k + 1:]
    if op == 4:
        return f[:k]
    if op == 5:
        return f[:k] + b"\x00" + f[k:]
    return rbytes(1 + random.getrandbits(5)) + f


def main(seed, n, p_mutate=0.3):
    random.seed(seed)
    d = frames.Deframer()
    sent = {}
    must = []
    counts = {"frames": n, "mutated": 0, "accepted": 0, "false_accepts": 0,
              "intact_lost": 0, "crashes": 0, "bad_frames": 0}
    got = set()
    prev_intact = True
    for k in range(n):
        body = rbytes((0, 3, 20, 200, 700)[random.getrandbits(8) % 5] if k % 2 else
                      random.getrandbits(8) % 200)
        fr = (TYPES[random.getrandbits(8) % len(TYPES)], k & 0xFFFF, body)
        wire = frames.pack(fr[0], fr[1], fr[2])
        intact = random.random() >= p_mutate
        if not intact:
            counts["mutated"] += 1
            for _ in range(1 + random.getrandbits(8) % 3):
                if wire:
                    wire = mutate(wire)
        key = (fr[0], fr[1], crc32(body), len(body))  # the frame, small in memory
        sent[key] = True
        if intact and prev_intact and len(body) + 7 < frames.MAX_FRAME:
            must.append(key)
        prev_intact = intact
        if k % 50 == 0:
            gc.collect()  # the unix port's small heap fragments on these sizes
        pos = 0
        try:
            while pos < len(wire):
                step = (1, 7, 64, 512)[random.getrandbits(8) % 4]
                for t, s, b in d.feed(wire[pos:pos + step]):
                    g = (t, s, crc32(b), len(b))
                    counts["accepted"] += 1
                    if g not in sent:
                        counts["false_accepts"] += 1
                    got.add(g)
                pos += step
        except Exception:
            counts["crashes"] += 1
    counts["intact_lost"] = sum(1 for key in must if key not in got)
    counts["bad_frames"] = d.bad_frames
    print(json.dumps(counts))


main(int(sys.argv[1]), int(sys.argv[2]))
