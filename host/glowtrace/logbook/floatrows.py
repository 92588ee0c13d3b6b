"""Curves from other instruments kept as float64 rows (time_s, volts, amps
and optionally light), streamed in chunks so that a very large file is read,
packed and stored in bounded memory: on disk while it is checked, LZMA
(`float64-columns-lzma-v1`: the rows' bytes, little-endian, row after row)
in the logbook.

`reduced` gives what the analysis reads: every row of a curve up to
MAX_POINTS rows, else the means of k consecutive rows (k the smallest whole
number that brings it under MAX_POINTS), computed chunk by chunk."""

import lzma
import math
from typing import Iterable, Iterator

import numpy as np

CHUNK_ROWS = 1 << 16
MAX_POINTS = 200_000  # the tester's own captures have about 20k sets
_IO_BYTES = 1 << 20


def rows_from_bytes(chunks: Iterable[bytes], ncols: int) -> Iterator[np.ndarray]:
    """Whole rows, as (m, ncols) float64 arrays, from a stream of bytes cut
    anywhere."""
    width = 8 * ncols
    rest = b""
    for chunk in chunks:
        buf = rest + chunk
        whole = len(buf) // width * width
        if whole:
            yield np.frombuffer(buf[:whole], "<f8").reshape(-1, ncols)
        rest = buf[whole:]
    if rest:
        raise ValueError(f"{len(rest)} bytes left over: not whole rows of {ncols} columns")


def reduced(rows: Iterable[np.ndarray], n_rows: int, ncols: int,
            max_points: int | None = MAX_POINTS) -> tuple[np.ndarray, int]:
    """(the rows, or means of k consecutive rows, k)."""
    k = 1 if not max_points or n_rows <= max_points else math.ceil(n_rows / max_points)
    out, carry = [], np.zeros((0, ncols))
    for r in rows:
        if k == 1:
            out.append(np.array(r))
            continue
        r = np.concatenate([carry, r]) if len(carry) else r
        whole = len(r) // k * k
        if whole:
            out.append(r[:whole].reshape(-1, k, ncols).mean(axis=1))
        carry = np.array(r[whole:])
    if len(carry):
        out.append(carry.mean(axis=0, keepdims=True))
    return (np.concatenate(out) if out else np.zeros((0, ncols))), k


def read_chunks(f, size: int = _IO_BYTES) -> Iterator[bytes]:
    while chunk := f.read(size):
        yield chunk


def compress(src, dst) -> int:
    """LZMA (the .xz container, as lzma.compress writes it) from one binary
    file to another, chunk by chunk; returns the bytes written."""
    # preset 1: noisy float64 rows barely compress further at 6 (5 % smaller,
    # 2.6 times slower, measured on a 20k-row curve); any preset reads back
    comp = lzma.LZMACompressor(preset=1)
    n = 0
    for chunk in read_chunks(src):
        n += dst.write(comp.compress(chunk))
    n += dst.write(comp.flush())
    return n


def decompress(chunks: Iterable[bytes]) -> Iterator[bytes]:
    dec = lzma.LZMADecompressor()
    for chunk in chunks:
        out = dec.decompress(chunk)
        if out:
            yield out
    if not dec.eof:
        raise lzma.LZMAError("the packed curve ends early")
