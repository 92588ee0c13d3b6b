# The multi-rate capture schedule. Times in microseconds from switch-on.
#
# Each phase: (name, end_us, interval_us, oversample, block_sets, chunk_sets)
#   interval_us  time between sample sets (one conversion of every channel)
#   oversample   conversions summed per channel per set (1..16)
#   block_sets   sets per BLOCK frame on the link
#   chunk_sets   sets the board acquires per call; the dense phase is taken in
#                one call (DMA on the rp2) so nothing pauses it to talk USB
#
# Link budget with 3 channels (PROTOCOL.md has the same table):
#   dense  0-20 ms   24 us/set, 125 kS/s aggregate   834 sets  5.0 kB
#          (one DMA acquisition, sent in blocks of 41 sets, ~1 ms each)
#   fast   20-500 ms 100 us/set x4 oversampled      4800 sets 28.8 kB
#   mid    0.5-5 s   1 ms/set  x16                  4500 sets 27.0 kB
#   slow   5 s-end   10 ms/set x16                   100 sets/s 0.6 kB/s
# The dense phase is buffered and sent during the fast phase: the worst
# sustained rate is (5.0 + 28.8) kB / 0.48 s = 70 kB/s, well under what USB
# CDC on the rp2 carries (a few hundred kB/s).

DENSE_US_PER_CHANNEL = 8  # 125 kS/s aggregate, a quarter of the ADC's 500 kS/s
DENSE_END_US = 20000

BASELINE = ("baseline", 0, 1000, 16, 32, 32)


def build(n_channels, max_us):
    dense_interval = DENSE_US_PER_CHANNEL * n_channels
    phases = [
        ("dense", DENSE_END_US, dense_interval, 1, 1000 // dense_interval,
         (DENSE_END_US + dense_interval - 1) // dense_interval),
        ("fast", 500000, 100, 4, 100, 100),
        ("mid", 5000000, 1000, 16, 100, 100),
        ("slow", 1 << 30, 10000, 16, 10, 10),
    ]
    out = []
    for p in phases:
        out.append(p)
        if p[1] >= max_us:
            break
    return out


def baseline_sets():
    return BASELINE[4]


def phase_sets(phase, start_us, max_us):
    """Number of sets a phase takes from start_us to its end (or max_us)."""
    end = phase[1] if phase[1] < max_us else max_us
    if end <= start_us:
        return 0
    return (end - start_us + phase[2] - 1) // phase[2]
