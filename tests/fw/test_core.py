# Scheduler, settle detector and supervisor of the firmware core.
from glowfw import schedule
from glowfw.settle import SettleDetector
from glowfw.supervisor import Supervisor, OPEN_HEATER, OVER_CURRENT, MAX_ON_TIME, HOST_SILENT
from fakeboard import FakeBoard


def test_dense_phase_meets_aggregate_rate():
    for nch in (3, 4):
        ph = schedule.build(nch, 60000000)
        dense = ph[0]
        assert dense[0] == "dense" and dense[1] == 20000
        aggregate = nch * 1000000 / dense[2]
        assert aggregate >= 100000, aggregate
        assert aggregate <= 500000  # the RP2040 ADC's own limit
        # the whole dense phase is one acquisition (DMA), sent in ~1 ms blocks
        assert 20000 <= dense[5] * dense[2] < 20000 + dense[2]
        assert dense[4] * dense[2] <= 1000


def test_schedule_steps_down_and_fits_the_link():
    ph = schedule.build(3, 60000000)
    intervals = [p[2] for p in ph]
    assert intervals == sorted(intervals)
    ends = [p[1] for p in ph]
    assert ends == sorted(ends)
    # bytes per second per phase (2 bytes per channel per set) stay far under
    # USB CDC's few hundred kB/s once the dense buffer has been flushed
    for p in ph[1:]:
        assert 3 * 2 * 1000000 / p[2] <= 100000
    for p in ph:
        assert 1 <= p[3] <= 16 and 4095 * p[3] <= 65535  # sums fit in u16


def test_schedule_stops_at_max_time():
    ph = schedule.build(3, 300000)
    assert [p[0] for p in ph] == ["dense", "fast"]
    assert schedule.phase_sets(ph[1], 20000, 300000) == (300000 - 20000) // 250


def _end_of(d, current, noise=0.0, step_us=100000, until_us=120000000):
    """Feed d the current at 10 Hz (with relative noise from a fixed LCG);
    the time it says settled, or None."""
    seed = 12345
    for t in range(step_us, until_us, step_us):
        seed = (1103515245 * seed + 12345) % 2147483648
        u = seed / 2147483648 - 0.5  # uniform, sd 0.29
        if d.update(t, current(t / 1e6) * (1 + noise * u / 0.29)):
            return t / 1e6
    return None


def test_settle_ends_soon_after_one_percent_on_an_exponential():
    # I(t) = 1 + 0.5 e^(-t/2s) is within 1 % of its final value from
    # t = 2 ln 50 = 7.82 s (closed form): the end comes after that, within 10 %
    import math
    t = _end_of(SettleDetector(0.01, 300000, 3000000), lambda s: 1 + 0.5 * math.exp(-s / 2))
    assert t is not None and 7.82 <= t <= 1.1 * 7.82, t


def test_settle_waits_for_a_slow_tail():
    # a fast fall hiding a slow one: 1 + 0.5 e^(-t/1s) + 0.05 e^(-t/8s) is
    # within 1 % from about 8 ln 5 = 12.9 s, though the fast part has fallen
    # below the slow one by 5 s (where a local extrapolation alone ended): never
    # early; late by the windows it takes to see one steady time constant
    import math
    t = _end_of(SettleDetector(0.01, 300000, 3000000),
                lambda s: 1 + 0.5 * math.exp(-s) + 0.05 * math.exp(-s / 8))
    assert t is not None and 12.9 <= t <= 2 * 12.9, t


def test_settle_is_not_fooled_by_converter_noise():
    # 0.3 % rms noise (a small current on the high range): never ends early,
    # still ends, within 30 % of the noiseless end
    import math
    t = _end_of(SettleDetector(0.01, 300000, 3000000),
                lambda s: 1 + 0.5 * math.exp(-s / 6), noise=0.003)
    assert t is not None and 6 * math.log(50) <= t <= 1.3 * 6 * math.log(50), t


def test_settle_detector_waits_min_time():
    d = SettleDetector(0.01, 100000, 3000000)
    assert not any(d.update(t, 5.0) for t in range(0, 2900000, 100000))
    assert d.update(3000000, 5.0)


def test_supervisor_causes():
    b = FakeBoard()
    s = Supervisor(b)
    s.arm(2000, 5000000, 10)
    assert s.check(1000, 50, True) == OVER_CURRENT
    assert s.check(19000, 0, False) is None          # open check waits for 20 ms
    assert s.check(21000, 3, False) == OPEN_HEATER
    s.arm(2000, 5000000, 10)
    assert s.check(21000, 300, False) is None
    assert s.check(5000001, 300, False) == MAX_ON_TIME
    s.arm(2000, 50000000, 10)
    b.wall_ms = 2001
    assert s.check(30000, 300, False) == HOST_SILENT
    s.heard_host()
    assert s.check(40000, 300, False) is None
