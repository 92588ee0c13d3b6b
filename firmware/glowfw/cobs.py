# Consistent Overhead Byte Stuffing (Cheshire & Baker, IEEE/ACM Trans.
# Networking, 1999). A frame never contains 0x00, so 0x00 delimits frames and a
# receiver resynchronises at the next delimiter after garbage.
# Works on whole runs found with find() rather than byte by byte: the rp2 runs
# this for every sample block, and a Python loop per byte would cost ~1 s of
# CPU per capture.

_ZERO = b"\x00"


def encode(data):
    data = bytes(data)
    n = len(data)
    out = bytearray()
    i = 0
    while True:
        j = data.find(_ZERO, i)
        end = n if j < 0 else j
        full = False
        while end - i >= 254:
            out.append(255)
            out.extend(data[i:i + 254])
            i += 254
            full = True
        if j < 0 and full and i == end:
            # a full 254-byte block ending the data carries no implied zero
            break
        out.append(end - i + 1)
        out.extend(data[i:end])
        if j < 0:
            break
        i = j + 1
    return bytes(out)


def decode(data):
    data = bytes(data)
    n = len(data)
    out = bytearray()
    i = 0
    while i < n:
        code = data[i]
        if code == 0:
            raise ValueError("zero byte inside COBS frame")
        end = i + code
        if end > n:
            raise ValueError("COBS frame truncated")
        block = data[i + 1:end]
        if block.find(_ZERO) >= 0:
            raise ValueError("zero byte inside COBS frame")
        out.extend(block)
        i = end
        if code < 255 and i < n:
            out.append(0)
    return bytes(out)
