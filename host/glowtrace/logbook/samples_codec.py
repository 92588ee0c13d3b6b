"""Lossless packing of a capture's blocks for storage.

`flac-phases-v1` (written now): the samples of each phase of the schedule
(dense, fast, mid, slow: each one rate and oversampling) as one FLAC stream
(RFC 9639, through libsndfile: linear prediction per frame with Rice-coded
residuals, the coder made for sampled signals), the u16 sums shifted to
int16 (x - 32768, exact); the streams one after another, each behind a
5-byte header (phase number u8, length u32). The block table (one row of
_BLOCK_FIELDS per block) is differenced down its columns, which makes it
nearly constant, and LZMA-compressed. bench/capture_bench.py prints the bytes
beside the order-0 entropy of the residuals of a least-squares linear
predictor.

`delta16-planes-lzma-v1` (read, no longer written): every block's sums in
received order, differenced along time mod 2**16, split into low and high
byte planes and LZMA-compressed; the block table as int64, LZMA."""

import io
import lzma
import struct

import numpy as np
import soundfile

from ..tester.protocol import Block

ENCODING = "flac-phases-v1"
PLANES = "delta16-planes-lzma-v1"
KNOWN = (ENCODING, PLANES)
_BLOCK_FIELDS = ("capture_id", "index", "phase", "n_channels", "n_sets",
                 "oversample", "t_start_us", "interval_us")
_STREAM_HEAD = "<BI"  # phase number, bytes of its FLAC stream
_FLAC_RATE = 48000    # a label FLAC requires; the block table has the real timing


def _table(blocks: list) -> np.ndarray:
    return np.array([[getattr(b, f) for f in _BLOCK_FIELDS] for b in blocks],
                    dtype="<i8").reshape(-1, len(_BLOCK_FIELDS))


def _channels(blocks: list) -> int:
    nch = blocks[0].n_channels if blocks else 0
    if blocks and any(b.n_channels != nch for b in blocks):
        raise ValueError("blocks of one capture must share a channel layout")
    return nch


def encode(blocks: list) -> tuple[bytes, bytes]:
    """(block table, samples) of ENCODING."""
    meta = _table(blocks)
    nch = _channels(blocks)
    deltas = np.diff(meta, axis=0, prepend=np.zeros((1, meta.shape[1]), "<i8"))
    out = bytearray()
    for phase in sorted({b.phase for b in blocks}):
        data = b"".join(b.data for b in blocks if b.phase == phase)
        sums = np.frombuffer(data, "<u2").reshape(-1, nch)
        if not len(sums):
            continue
        pcm = (sums.astype(np.int32) - 32768).astype(np.int16)
        f = io.BytesIO()
        soundfile.write(f, pcm, _FLAC_RATE, format="FLAC", subtype="PCM_16",
                        compression_level=1.0)
        stream = f.getvalue()
        out += struct.pack(_STREAM_HEAD, phase, len(stream)) + stream
    return lzma.compress(deltas.astype("<i8").tobytes()), bytes(out)


def decode(encoding: str, meta_blob: bytes, samples_blob: bytes) -> list:
    if encoding == PLANES:
        return _decode_planes(meta_blob, samples_blob)
    if encoding != ENCODING:
        raise ValueError(f"unknown sample encoding {encoding}")
    deltas = np.frombuffer(lzma.decompress(meta_blob), "<i8").reshape(-1, len(_BLOCK_FIELDS))
    meta = np.cumsum(deltas, axis=0)
    phases, pos = {}, 0
    while pos < len(samples_blob):
        phase, n = struct.unpack_from(_STREAM_HEAD, samples_blob, pos)
        pos += struct.calcsize(_STREAM_HEAD)
        pcm, _ = soundfile.read(io.BytesIO(samples_blob[pos:pos + n]), dtype="int16",
                                always_2d=True)
        phases[phase] = [(pcm.astype(np.int32) + 32768).astype("<u2"), 0]
        pos += n
    blocks = []
    for m in meta:
        fields = dict(zip(_BLOCK_FIELDS, (int(x) for x in m)))
        n = fields["n_sets"]
        sums, row = phases.get(fields["phase"], [np.zeros((0, 1), "<u2"), 0])
        fields["data"] = sums[row:row + n].tobytes()
        if n:
            phases[fields["phase"]][1] = row + n
        blocks.append(Block(**fields))
    return blocks


def _decode_planes(meta_blob: bytes, samples_blob: bytes) -> list:
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


def encode_planes(blocks: list) -> tuple[bytes, bytes]:
    """The older encoding (PLANES), kept to test that it still reads and
    for the benchmark's comparison."""
    meta = _table(blocks)
    nch = _channels(blocks)
    data = b"".join(b.data for b in blocks)
    sums = np.frombuffer(data, "<u2").reshape(-1, max(nch, 1))
    delta = np.diff(sums, axis=0, prepend=np.zeros((1, sums.shape[1]), "<u2"))
    raw = delta.astype("<u2").tobytes()
    planes = raw[0::2] + raw[1::2]
    return lzma.compress(meta.tobytes()), lzma.compress(planes)
