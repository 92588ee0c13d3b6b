"""A raw capture as it came off the link, and the pieces it is made of.

Nothing here interprets the curve: that is the analysis's job (later issues).
The raw capture keeps every block exactly as received so the analysis can be
re-run on it."""

import uuid as uuidlib
from dataclasses import dataclass, field
from datetime import datetime, timezone

import numpy as np

from .protocol import Block


def utc_now_iso() -> str:
    return datetime.now(timezone.utc).isoformat(timespec="milliseconds")


@dataclass
class RawCapture:
    tube: str | None
    section: str
    port: str
    hello: dict                    # the tester's handshake: board, front end, calibration
    params: dict = field(default_factory=dict)   # as the firmware accepted them
    channels: list = field(default_factory=list)
    ambient_c: float | None = None
    phases: list = field(default_factory=list)
    blocks: list = field(default_factory=list)   # protocol.Block, in order received
    end: dict | None = None        # CAPTURE_END record
    trip: dict | None = None       # TRIP record, when the firmware tripped
    incomplete_reason: str | None = None
    link: dict = field(default_factory=dict)
    started_at: str = field(default_factory=utc_now_iso)
    uuid: str = field(default_factory=lambda: str(uuidlib.uuid4()))
    analysis: dict | None = None   # filled in after storing; kept in its own table

    @property
    def complete(self) -> bool:
        return self.incomplete_reason is None

    @property
    def end_reason(self) -> str | None:
        return self.end["reason"] if self.end else None

    @property
    def trip_cause(self) -> str | None:
        """Why the firmware switched off early: from the TRIP record, or from
        the end record when the TRIP frame itself was lost."""
        if self.trip and self.trip.get("cause"):
            return self.trip["cause"]
        return (self.end or {}).get("trip")

    @property
    def n_sets(self) -> int:
        return sum(b.n_sets for b in self.blocks)

    def check_whole(self) -> str | None:
        """Why the received blocks are not the whole capture, or None."""
        if self.end is None:
            return "no end-of-capture record"
        indices = [b.index for b in self.blocks]
        if indices != list(range(len(indices))):
            return "blocks missing or out of order"
        if len(indices) != self.end["blocks"] or self.n_sets != self.end["sets"]:
            return (f"{len(indices)} blocks / {self.n_sets} sets received, "
                    f"tester sent {self.end['blocks']} / {self.end['sets']}")
        if self.link.get("lost_frames"):
            return f"{self.link['lost_frames']} frame(s) lost on the link"
        return None

    def arrays(self):
        """(t_us int64 [n], sums uint16 [n, channels], oversample uint8 [n])
        in time order."""
        nch = len(self.channels)
        if not self.blocks:
            return (np.zeros(0, np.int64), np.zeros((0, nch), np.uint16),
                    np.zeros(0, np.uint8))
        ts, sums, osm = [], [], []
        for b in sorted(self.blocks, key=lambda b: b.t_start_us):
            ts.append(b.t_start_us + b.interval_us * np.arange(b.n_sets, dtype=np.int64))
            sums.append(np.frombuffer(b.data, "<u2").reshape(b.n_sets, b.n_channels))
            osm.append(np.full(b.n_sets, b.oversample, np.uint8))
        return np.concatenate(ts), np.concatenate(sums), np.concatenate(osm)


def blocks_equal(a: list, b: list) -> bool:
    return len(a) == len(b) and all(x == y for x, y in zip(a, b))


__all__ = ["RawCapture", "Block", "blocks_equal", "utc_now_iso"]
