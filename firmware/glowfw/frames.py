# Frames on the link: COBS(type u8, seq u16 LE, body, CRC-32 LE) then 0x00.
import struct

from glowfw import cobs
from glowfw.crc import crc32

MAX_FRAME = 1024  # longest command frame accepted from the host, bytes


def pack(mtype, seq, body=b""):
    payload = bytearray(3 + len(body) + 4)
    payload[0] = mtype
    payload[1] = seq & 0xFF
    payload[2] = (seq >> 8) & 0xFF
    payload[3:3 + len(body)] = body
    c = crc32(memoryview(payload)[:3 + len(body)])
    struct.pack_into("<I", payload, 3 + len(body), c)
    return cobs.encode(payload) + b"\x00"


def unpack(frame):
    """Decode one frame (without its delimiter) to (type, seq, body).

    Raises ValueError for a frame that is malformed or fails its CRC."""
    payload = cobs.decode(frame)
    if len(payload) < 7:
        raise ValueError("frame too short")
    body_end = len(payload) - 4
    want = struct.unpack_from("<I", payload, body_end)[0]
    if crc32(memoryview(payload)[:body_end]) != want:
        raise ValueError("CRC mismatch")
    return payload[0], payload[1] | (payload[2] << 8), payload[3:body_end]


class Deframer:
    """Splits a byte stream into frames; garbage costs at most one frame."""

    def __init__(self, limit=MAX_FRAME):
        self.buf = bytearray()
        self.limit = limit
        self.bad_frames = 0

    def feed(self, data):
        frames = []
        for b in data:
            if b == 0:
                if self.buf:
                    try:
                        frames.append(unpack(self.buf))
                    except ValueError:
                        self.bad_frames += 1
                    self.buf = bytearray()
            elif len(self.buf) < self.limit:
                self.buf.append(b)
            else:
                # an over-long run is garbage: drop it and wait for a delimiter
                self.bad_frames += 1
                self.buf = bytearray()
        return frames
