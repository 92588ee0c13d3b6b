# COBS and CRC-32 of the firmware against published values.
from glowfw import cobs, crc, frames

# Worked examples of COBS (Cheshire & Baker, IEEE/ACM Trans. Networking 1999;
# the same cases are listed in the algorithm's common references).
EXAMPLES = [
    (b"\x00", b"\x01\x01"),
    (b"\x00\x00", b"\x01\x01\x01"),
    (b"\x00\x11\x00", b"\x01\x02\x11\x01"),
    (b"\x11\x22\x00\x33", b"\x03\x11\x22\x02\x33"),
    (b"\x11\x22\x33\x44", b"\x05\x11\x22\x33\x44"),
    (b"\x11\x00\x00\x00", b"\x02\x11\x01\x01\x01"),
    (bytes(range(1, 255)), b"\xff" + bytes(range(1, 255))),
    (b"\x00" + bytes(range(1, 255)), b"\x01\xff" + bytes(range(1, 255))),
    (bytes(range(1, 256)), b"\xff" + bytes(range(1, 255)) + b"\x02\xff"),
    (bytes(range(2, 256)) + b"\x00", b"\xff" + bytes(range(2, 256)) + b"\x01\x01"),
    (bytes(range(3, 256)) + b"\x00\x01", b"\xfe" + bytes(range(3, 256)) + b"\x02\x01"),
]


def test_cobs_worked_examples():
    for raw, enc in EXAMPLES:
        assert cobs.encode(raw) == enc, (raw[:4], cobs.encode(raw)[:8])
        assert cobs.decode(enc) == raw


def test_cobs_rejects_zero_and_truncation():
    for bad in (b"\x03\x11\x00", b"\x05\x11\x22", b"\x00"):
        try:
            cobs.decode(bad)
        except ValueError:
            continue
        raise AssertionError("accepted " + repr(bad))


def test_crc32_catalogue_check_value():
    # CRC-32 (ISO-HDLC) check value from the catalogue of parametrised CRCs
    assert crc.crc32(b"123456789") == 0xCBF43926
    assert crc.crc32_table(b"123456789") == 0xCBF43926


def test_crc32_table_matches_native_on_long_data():
    data = bytes((i * 7 + 3) & 0xFF for i in range(3000))
    assert crc.crc32_table(data) == crc.crc32(data)


def test_frame_round_trip_and_corruption():
    f = frames.pack(0x11, 513, b"\x00\x01\x00\xff" * 40)
    assert f[-1] == 0 and 0 not in f[:-1]
    t, seq, body = frames.unpack(f[:-1])
    assert (t, seq, bytes(body)) == (0x11, 513, b"\x00\x01\x00\xff" * 40)
    bad = bytearray(f[:-1])
    bad[5] ^= 0x40
    try:
        frames.unpack(bytes(bad))
    except ValueError:
        return
    raise AssertionError("corrupted frame accepted")


def test_deframer_resynchronises_after_garbage():
    good = frames.pack(0x84, 1) + frames.pack(0x85, 2)
    d = frames.Deframer()
    got = d.feed(b"\x13\x37garbage\xff" + b"\x00" + good[:3])
    got += d.feed(good[3:])
    assert [(t, s) for t, s, _ in got] == [(0x84, 1), (0x85, 2)]
    assert d.bad_frames == 1
