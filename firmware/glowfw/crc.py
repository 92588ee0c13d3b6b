# CRC-32 (the zlib/Ethernet CRC: poly 0x04C11DB7 reflected, init and xorout
# 0xFFFFFFFF; catalogue check value for "123456789" is 0xCBF43926).
# binascii.crc32 is C code where the port has it; the table version is the
# fallback for builds without it.

try:
    from binascii import crc32 as _native
except ImportError:
    _native = None

_table = None


def _make_table():
    import array
    t = array.array("I", [0] * 256)
    for n in range(256):
        c = n
        for _ in range(8):
            c = (c >> 1) ^ 0xEDB88320 if c & 1 else c >> 1
        t[n] = c
    return t


def crc32_table(data, crc=0):
    global _table
    if _table is None:
        _table = _make_table()
    t = _table
    c = crc ^ 0xFFFFFFFF
    for b in data:
        c = t[(c ^ b) & 0xFF] ^ (c >> 8)
    return c ^ 0xFFFFFFFF


def crc32(data, crc=0):
    if _native is not None:
        return _native(data, crc) & 0xFFFFFFFF
    return crc32_table(data, crc)
