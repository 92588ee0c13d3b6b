# The multi-rate capture schedule. Times in microseconds from switch-on.
#
# Each phase: (name, end_us, interval_us, oversample, block_sets, chunk_sets)
#   interval_us  time between sample sets (one conversion of every channel)
#   oversample   conversions summed per channel per set (1..16)
#   block_sets   sets per BLOCK frame on the link
#   chunk_sets   sets the board acquires per call; the dense phase is taken in
#                one call (DMA on the rp2) so nothing pauses it to talk USB
#
# Link budget with 3 channels (PROTOCOL.md has the table as measured by
# bench/link_bench.py):
#   dense  0-20 ms   24 us/set, 125 kS/s aggregate   834 sets  5.0 kB
#          (one DMA acquisition, kept in RAM, and sent one block of 41 sets
#          after each fast-phase chunk, spread over the fast phase)
#   fast   20-500 ms 250 us/set x8 oversampled      1920 sets 11.5 kB
#   mid    0.5-5 s   2 ms/set  x16                  2250 sets 13.5 kB
#   slow   5 s-end   10 ms/set x16                   100 sets/s 0.6 kB/s
#          (blocks of 10 sets: the end rule is fed every 100 ms; at 200 ms a
#          fast heater's capture ran up to 17 % past its settling)
# The busiest stretch is the fast phase with the dense blocks: (11.5 + 5.0) kB
# in 0.48 s, 34 kB/s; with the light channel 46 kB/s.
# Why these rates: the analysis reads the curve on about 60 log-spaced
# intervals; the finest of them after 20 ms span several ms, so a set every
# 250 us (then 2 ms, then 10 ms) gives each interval tens of sets, and the
# oversampling (8, then 16 conversions summed) lowers each set's noise by
# sqrt(8) to sqrt(16) instead of sending more sets of the same noise. The slow
# phase stays at 10 ms: the end rule's windows need its sets (at 20 ms a fast
# heater's capture ran 20 % past its settling instead of 10 %). The
# dense phase keeps every conversion: the inrush peak and the first
# milliseconds are where the flash shows.

DENSE_US_PER_CHANNEL = 8  # 125 kS/s aggregate, a quarter of the ADC's 500 kS/s
DENSE_END_US = 20000

BASELINE = ("baseline", 0, 1000, 16, 32, 32)


def build(n_channels, max_us):
    dense_interval = DENSE_US_PER_CHANNEL * n_channels
    phases = [
        ("dense", DENSE_END_US, dense_interval, 1, 1000 // dense_interval,
         (DENSE_END_US + dense_interval - 1) // dense_interval),
        ("fast", 500000, 250, 8, 80, 80),
        ("mid", 5000000, 2000, 16, 50, 50),
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
