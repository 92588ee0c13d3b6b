"""Lossless packing of a capture's blocks for storage.

Samples: every block's u16 sums in received order as one [sets, channels]
array, differenced along time (mod 2**16, so the round trip is exact for any
value), split into low and high byte planes (the high plane is nearly all
zeros after differencing) and compressed with LZMA. Block headers: an int64
table compressed the same way. A 20 s capture of 11k sets x 3 channels packs
to a few tens of kB (see bench/capture_bench.py)."""

import lzma

import numpy as np

from ..tester.protocol import Block

ENCODING = "delta16-planes-lzma-v1"
_BLOCK_FIELDS = ("capture_id", "index", "phase", "n_channels", "n_sets",
                 "oversample", "t_start_us", "interval_us")


def encode(blocks: list) -> tuple[bytes, bytes]:
    meta = np.array([[getattr(b, f) for f in _BLOCK_FIELDS] for b in blocks],
                    dtype="<i8").reshape(-1, len(_BLOCK_FIELDS))
    nch = blocks[0].n_channels if blocks else 0
    if blocks and any(b.n_channels != nch for b in blocks):
        raise ValueError("blocks of one capture must share a channel layout")
    data = b"".join(b.data for b in blocks)
    sums = np.frombuffer(data, "<u2").reshape(-1, max(nch, 1))
    delta = np.diff(sums, axis=0, prepend=np.zeros((1, sums.shape[1]), "<u2"))
    raw = delta.astype("<u2").tobytes()
    planes = raw[0::2] + raw[1::2]
    return lzma.compress(meta.tobytes()), lzma.compress(planes)


def decode(meta_blob: bytes, samples_blob: bytes) -> list:
    meta = np.frombuffer(lzma.decompress(meta_blob), "<i8").reshape(-1, len(_BLOCK_FIELDS))
    planes = lzma.decompress(samples_blob)
    half = len(planes) // 2
    raw = np.empty(2 * half, np.uint8)
    raw[0::2] = np.frombuffer(planes[:half], np.uint8)
    raw[1::2] = np.frombuffer(planes[half:], np.uint8)
    if len(meta) == 0:
        return []
    nch = int(meta[0, 3])
    delta = raw.view("<u2").reshape(-1, nch)
    sums = np.cumsum(delta, axis=0, dtype=np.uint16)  # wraps mod 2**16 as encoded
    blocks, row = [], 0
    for m in meta:
        fields = dict(zip(_BLOCK_FIELDS, (int(x) for x in m)))
        n = fields["n_sets"]
        fields["data"] = sums[row:row + n].astype("<u2").tobytes()
        row += n
        blocks.append(Block(**fields))
    return blocks
