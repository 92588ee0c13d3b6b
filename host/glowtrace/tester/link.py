"""The host's end of the serial link: frames out, checked frames in.

Garbage between frames costs at most the frame it lands in (COBS resyncs at
the next 0x00); a gap in the device's sequence numbers is counted as lost
frames so a capture with a hole is never taken for a whole one."""

import time
from dataclasses import dataclass, field

import serial

from . import protocol
from ..errors import LinkError

MAX_FRAME = 64 * 1024  # longer runs without a delimiter are garbage


@dataclass
class LinkStats:
    frames: int = 0
    bad_frames: int = 0
    lost_frames: int = 0
    bytes_in: int = 0
    bytes_out: int = 0
    gaps: list = field(default_factory=list)  # (expected seq, got seq)

    def as_dict(self) -> dict:
        return {"frames": self.frames, "bad_frames": self.bad_frames,
                "lost_frames": self.lost_frames, "bytes_in": self.bytes_in,
                "bytes_out": self.bytes_out, "gaps": self.gaps[:20]}


class Link:
    def __init__(self, port: serial.SerialBase):
        self.port = port
        self.seq = 0
        self.rx = bytearray()
        self.expect_seq = None
        self.stats = LinkStats()
        # the first write starts with a delimiter: the tester's decoder drops
        # any half frame it held, and a board still in its boot window
        # (firmware/main.py) knows a glowtrace host from a REPL tool's Ctrl-C
        self._delimited = False

    def reset_stats(self) -> None:
        self.stats = LinkStats()

    def send(self, mtype: int, body: bytes = b"") -> None:
        data = protocol.pack(mtype, self.seq, body)
        if not self._delimited:
            data, self._delimited = b"\x00" + data, True
        self.seq = (self.seq + 1) & 0xFFFF
        try:
            self.port.write(data)
            self.port.flush()
        except (serial.SerialException, OSError) as e:
            raise LinkError(f"link write failed: {e}") from None
        self.stats.bytes_out += len(data)

    def _fill(self, timeout: float) -> bool:
        self.port.timeout = timeout
        try:
            waiting = self.port.in_waiting
            chunk = self.port.read(max(1, min(waiting, 65536)))
        except (serial.SerialException, OSError) as e:
            raise LinkError(f"link lost: {e}") from None
        self.stats.bytes_in += len(chunk)
        self.rx.extend(chunk)
        return bool(chunk)

    def _next_buffered(self):
        while True:
            end = self.rx.find(0)
            if end < 0:
                if len(self.rx) > MAX_FRAME:
                    self.stats.bad_frames += 1
                    del self.rx[:]
                return None
            raw = bytes(self.rx[:end])
            del self.rx[:end + 1]
            if not raw:
                continue
            try:
                frame = protocol.unpack(raw)
            except protocol.FrameError:
                self.stats.bad_frames += 1
                continue
            self._track(frame)
            return frame

    def _track(self, frame: protocol.Frame) -> None:
        self.stats.frames += 1
        if frame.mtype == protocol.HELLO and frame.seq == 0:
            self.expect_seq = None  # the device (re)booted: its count restarts
        if self.expect_seq is not None and frame.seq != self.expect_seq:
            lost = (frame.seq - self.expect_seq) & 0xFFFF
            self.stats.lost_frames += lost
            self.stats.gaps.append((self.expect_seq, frame.seq))
        self.expect_seq = (frame.seq + 1) & 0xFFFF

    def receive(self, timeout: float):
        """The next valid frame, or None after `timeout` seconds."""
        deadline = time.monotonic() + timeout
        while True:
            frame = self._next_buffered()
            if frame is not None:
                return frame
            left = deadline - time.monotonic()
            if left <= 0:
                return None
            self._fill(min(left, 0.05))

    def drain(self, quiet: float = 0.05) -> None:
        """Discard whatever is in flight (stale frames from an earlier run)."""
        while self.receive(quiet) is not None:
            pass
