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
    assert schedule.phase_sets(ph[1], 20000, 300000) == 2800


def test_settle_detector_on_exponential():
    # I(t) = 1 + e^(-t/2s): settles (within 0.5 % over 2 s) once the fall over
    # 2 s drops below 0.5 %: e^(-t/2)(1-e^-1) < 0.005 -> t > 9.6 s
    import math
    d = SettleDetector(0.005, 2000000, 3000000)
    t_settled = None
    for k in range(0, 30000, 100):
        t = k * 1000
        if d.update(t, 1 + math.exp(-t / 2e6)):
            t_settled = t
            break
    assert t_settled is not None and 9.6e6 < t_settled < 14e6, t_settled


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
