"""Frames, COBS, CRC-32 and the link's resynchronisation and loss detection."""

import json
import os
import subprocess
import zlib
from pathlib import Path

import serial
from cobs import cobs
from hypothesis import given, settings
from hypothesis import strategies as st

from glowtrace.tester import protocol
from glowtrace.tester.link import Link

REPO = Path(__file__).resolve().parent.parent


def test_crc32_catalogue_check_value():
    # CRC-32/ISO-HDLC check value, catalogue of parametrised CRC algorithms
    assert zlib.crc32(b"123456789") == 0xCBF43926


def test_cobs_library_matches_paper_examples():
    # Cheshire & Baker (1999) worked examples, as in the firmware's own test
    assert cobs.encode(b"\x11\x22\x00\x33") == b"\x03\x11\x22\x02\x33"
    assert cobs.encode(b"\x00\x00") == b"\x01\x01\x01"
    assert cobs.encode(bytes(range(1, 256))) == b"\xff" + bytes(range(1, 255)) + b"\x02\xff"


def test_protocol_numbers_agree_with_firmware(micropython):
    code = ("import json\nfrom glowfw import proto\n"
            "print(json.dumps({k: getattr(proto, k) for k in dir(proto) if k.isupper()}))")
    env = dict(os.environ, MICROPYPATH=str(REPO / "firmware"))
    r = subprocess.run([micropython, "-c", code], capture_output=True, text=True, env=env)
    assert r.returncode == 0, r.stderr
    fw = json.loads(r.stdout)
    for name, value in fw.items():
        if name == "BLOCK_HEADER":
            assert value == protocol.BLOCK_HEADER.format
        elif name == "BLOCK_HEADER_SIZE":
            assert value == protocol.BLOCK_HEADER.size
        else:
            assert getattr(protocol, name) == value, name


def test_firmware_frames_decode_on_host(micropython):
    code = ("import sys\nfrom glowfw import frames\n"
            "sys.stdout.buffer.write(frames.pack(0x11, 65535, bytes(range(256)) * 3))")
    env = dict(os.environ, MICROPYPATH=str(REPO / "firmware"))
    r = subprocess.run([micropython, "-c", code], capture_output=True, env=env)
    assert r.returncode == 0
    f = protocol.unpack(r.stdout[:-1])
    assert (f.mtype, f.seq, f.body) == (0x11, 65535, bytes(range(256)) * 3)


@settings(max_examples=200, deadline=None)
@given(mtype=st.integers(0, 255), seq=st.integers(0, 65535), body=st.binary(max_size=700))
def test_frame_round_trip(mtype, seq, body):
    data = protocol.pack(mtype, seq, body)
    assert data.endswith(b"\x00") and b"\x00" not in data[:-1]
    assert protocol.unpack(data[:-1]) == protocol.Frame(mtype, seq, body)


def _loop_link():
    port = serial.serial_for_url("loop://", timeout=0.05)
    return port, Link(port)


def test_link_resynchronises_after_garbage():
    port, link = _loop_link()
    frames = [protocol.pack(protocol.BLOCK, i, bytes([i, 0, i])) for i in range(5)]
    port.write(b"\xde\xad\x00\x00\x17\x00" + frames[0] + b"noise\x00" + b"".join(frames[1:]))
    got = [link.receive(0.5) for _ in range(5)]
    assert [f.seq for f in got] == [0, 1, 2, 3, 4]
    assert link.stats.bad_frames == 3  # "\xde\xad", "\x17" and "noise"
    assert link.stats.lost_frames == 0


def test_link_detects_a_dropped_frame():
    port, link = _loop_link()
    frames = [protocol.pack(protocol.BLOCK, i, b"x") for i in range(6)]
    port.write(b"".join(frames[:3] + frames[4:]))  # frame 3 never arrives
    got = [link.receive(0.5).seq for _ in range(5)]
    assert got == [0, 1, 2, 4, 5]
    assert link.stats.lost_frames == 1 and link.stats.gaps == [(3, 4)]


def test_link_detects_corruption_as_bad_frame():
    port, link = _loop_link()
    f = bytearray(protocol.pack(protocol.BLOCK, 1, b"payload"))
    f[4] ^= 0x01
    port.write(protocol.pack(protocol.BLOCK, 0, b"ok") + bytes(f)
               + protocol.pack(protocol.BLOCK, 2, b"ok"))
    assert [link.receive(0.5).seq for _ in range(2)] == [0, 2]
    assert link.stats.bad_frames == 1 and link.stats.lost_frames == 1


def test_block_parse_checks_length():
    head = protocol.BLOCK_HEADER.pack(1, 0, 1, 3, 2, 1, -5, 24)
    b = protocol.Block.parse(head + b"\x01\x00" * 6)
    assert (b.n_sets, b.t_start_us, b.interval_us) == (2, -5, 24)
    try:
        protocol.Block.parse(head + b"\x01\x00" * 5)
    except protocol.FrameError:
        return
    raise AssertionError("short block accepted")


def test_protocol_doc_lists_every_message():
    doc = (REPO / "firmware" / "PROTOCOL.md").read_text()
    for value, name in protocol.NAMES.items():
        assert name in doc and f"0x{value:02X}" in doc, name
