"""Damaged frame streams for the decoders (host and firmware): valid frames,
some of them mutated (bits flipped, bytes dropped, inserted or replaced, cut
short, a stray delimiter, two frames spliced), fed in chunks of random size.
What must hold: no crash, no false accept (every accepted frame is one that
was sent), and every frame that was sent intact after an intact frame is
received. Used by tests/test_link_fuzz.py (a short run) and
bench/link_fault_bench.py (a million frames and more)."""

import random
from dataclasses import dataclass, field

from glowtrace.tester import protocol
from glowtrace.tester.link import Link, LinkStats


def _flip(f, r):
    k = r.randrange(len(f))
    return f[:k] + bytes([f[k] ^ (1 << r.randrange(8))]) + f[k + 1:]


def _drop(f, r):
    k = r.randrange(len(f))
    return f[:k] + f[k + 1:]


def _insert(f, r):
    k = r.randrange(len(f) + 1)
    return f[:k] + bytes([r.randrange(256)]) + f[k:]


def _replace(f, r):
    k = r.randrange(len(f))
    return f[:k] + bytes([r.randrange(256)]) + f[k + 1:]


def _cut(f, r):
    return f[:r.randrange(len(f))]


def _delimiter(f, r):
    k = r.randrange(len(f))
    return f[:k] + b"\x00" + f[k:]


def _garbage(f, r):
    return bytes(r.randrange(256) for _ in range(r.randrange(1, 40))) + f


MUTATIONS = (_flip, _drop, _insert, _replace, _cut, _delimiter, _garbage)


@dataclass
class FuzzCounts:
    frames: int = 0          # frames sent
    mutated: int = 0         # of them, damaged on the way
    accepted: int = 0        # frames the decoder returned
    false_accepts: int = 0   # accepted but never sent: must stay 0
    intact_lost: int = 0     # sent intact after an intact frame, not received: must stay 0
    crashes: int = 0         # exceptions out of the decoder: must stay 0
    bad_frames: int = 0      # what the decoder counted as bad
    errors: list = field(default_factory=list)

    def add(self, other: "FuzzCounts") -> None:
        for k, v in vars(other).items():
            if k == "errors":
                self.errors.extend(v[:5])
            else:
                setattr(self, k, getattr(self, k) + v)


def random_frame(r: random.Random, seq: int) -> tuple[int, int, bytes]:
    mtype = r.choice(sorted(protocol.NAMES))
    body = bytes(r.randrange(256) for _ in range(r.choice((0, 3, 20, 200, r.randrange(700)))))
    return mtype, seq, body


def damaged_stream(r: random.Random, n: int, p_mutate: float = 0.3):
    """(stream bytes, the frames sent, which of them must be received)."""
    sent, must, parts = [], [], []
    prev_intact = True
    for k in range(n):
        fr = random_frame(r, k & 0xFFFF)
        wire = protocol.pack(*fr)
        intact = r.random() >= p_mutate
        if not intact:
            for _ in range(r.randint(1, 3)):
                wire = r.choice(MUTATIONS)(wire, r) if wire else wire
        sent.append((fr, intact))
        if intact and prev_intact:
            must.append(fr)
        prev_intact = intact
        parts.append(wire)
    return b"".join(parts), sent, must


def run_host(seed: int, n: int, p_mutate: float = 0.3) -> FuzzCounts:
    """The host's decoder (tester/link.py: resync, COBS, CRC, sequence)
    over one damaged stream, fed in random chunks."""
    r = random.Random(seed)
    stream, sent, must = damaged_stream(r, n, p_mutate)
    c = FuzzCounts(frames=n, mutated=sum(not ok for _, ok in sent))
    link = Link(port=None)
    link.stats = LinkStats()
    got = []
    pos = 0
    try:
        while pos < len(stream):
            step = r.choice((1, 7, 64, 512, 4096))
            link.rx.extend(stream[pos:pos + step])
            pos += step
            while (f := link._next_buffered()) is not None:
                got.append((f.mtype, f.seq, bytes(f.body)))
    except Exception as e:  # noqa: BLE001 - counting crashes is the point
        c.crashes += 1
        c.errors.append(f"seed {seed}: {type(e).__name__}: {e}")
    sent_set = {fr for fr, _ in sent}
    c.accepted = len(got)
    c.false_accepts = sum(g not in sent_set for g in got)
    got_set = set(got)
    c.intact_lost = sum(fr not in got_set for fr in must)
    c.bad_frames = link.stats.bad_frames
    return c
