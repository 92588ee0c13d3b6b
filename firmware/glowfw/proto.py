# Message types and versions of the link protocol; firmware/PROTOCOL.md is the
# reference. The host keeps the same numbers in glowtrace/protocol.py and a
# test checks that the two agree.
from micropython import const

PROTOCOL_VERSION = const(1)

# device -> host
HELLO = const(0x01)
REPLY = const(0x02)
STATUS = const(0x03)
CAPTURE_START = const(0x10)
BLOCK = const(0x11)
CAPTURE_END = const(0x12)
TRIP = const(0x13)
NOTICE = const(0x14)
MEASUREMENT = const(0x15)

# host -> device
IDENTIFY = const(0x81)
CAPTURE = const(0x82)
ABORT = const(0x83)
HEARTBEAT = const(0x84)
GET_STATUS = const(0x85)
MEASURE = const(0x86)
SET_CALIBRATION = const(0x87)
ENTER_REPL = const(0x88)

# BLOCK body header: capture id u16, block index u16, phase u8, channel
# count u8, set count u16, oversample u8, pad u8, start time i32 (us from
# switch-on), set interval u32 (us); then set count x channel count u16 sums.
BLOCK_HEADER = "<HHBBHBxiI"
BLOCK_HEADER_SIZE = const(18)
