"""The link protocol (firmware/PROTOCOL.md): frames and message types.

A frame is COBS(type u8, seq u16 LE, body, CRC-32 LE of the rest) + 0x00.
COBS comes from the `cobs` package and CRC-32 from zlib; the firmware has its
own implementations and the tests hold both to the published examples."""

import json
import struct
import zlib
from dataclasses import dataclass

from cobs import cobs

PROTOCOL_VERSION = 1

# device -> host
HELLO = 0x01
REPLY = 0x02
STATUS = 0x03
CAPTURE_START = 0x10
BLOCK = 0x11
CAPTURE_END = 0x12
TRIP = 0x13
NOTICE = 0x14
MEASUREMENT = 0x15

# host -> device
IDENTIFY = 0x81
CAPTURE = 0x82
ABORT = 0x83
HEARTBEAT = 0x84
GET_STATUS = 0x85
MEASURE = 0x86
SET_CALIBRATION = 0x87
ENTER_REPL = 0x88

NAMES = {v: k for k, v in dict(globals()).items()
         if k.isupper() and isinstance(v, int) and k != "PROTOCOL_VERSION"}

BLOCK_HEADER = struct.Struct("<HHBBHBxiI")


class FrameError(ValueError):
    """A frame that is not COBS, too short or fails its CRC."""


@dataclass(frozen=True)
class Frame:
    mtype: int
    seq: int
    body: bytes

    @property
    def name(self) -> str:
        return NAMES.get(self.mtype, f"0x{self.mtype:02x}")

    def json(self) -> dict:
        return json.loads(self.body)


def pack(mtype: int, seq: int, body: bytes = b"") -> bytes:
    payload = struct.pack("<BH", mtype, seq & 0xFFFF) + body
    payload += struct.pack("<I", zlib.crc32(payload))
    return cobs.encode(payload) + b"\x00"


def unpack(frame: bytes) -> Frame:
    """Decode one frame given without its 0x00 delimiter."""
    try:
        payload = cobs.decode(frame)
    except cobs.DecodeError as e:
        raise FrameError(f"not COBS: {e}") from None
    if len(payload) < 7:
        raise FrameError("frame too short")
    (crc,) = struct.unpack_from("<I", payload, len(payload) - 4)
    if zlib.crc32(payload[:-4]) != crc:
        raise FrameError("CRC mismatch")
    mtype, seq = struct.unpack_from("<BH", payload)
    return Frame(mtype, seq, bytes(payload[3:-4]))


@dataclass(frozen=True)
class Block:
    """One BLOCK message: sums of `oversample` conversions per channel."""
    capture_id: int
    index: int
    phase: int
    n_channels: int
    n_sets: int
    oversample: int
    t_start_us: int
    interval_us: int
    data: bytes  # n_sets * n_channels little-endian u16

    @classmethod
    def parse(cls, body: bytes) -> "Block":
        if len(body) < BLOCK_HEADER.size:
            raise FrameError("block too short")
        head = BLOCK_HEADER.unpack_from(body)
        data = body[BLOCK_HEADER.size:]
        n_channels, n_sets = head[3], head[4]
        if len(data) != 2 * n_channels * n_sets:
            raise FrameError("block length does not match its header")
        return cls(*head, data=bytes(data))
