"""Control charts and trend statistics against published examples and scipy."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from glowtrace.judgement import charts

# Montgomery, Introduction to Statistical Quality Control, tabular CUSUM example
# (Table 9.1; 30 observations, the first 20 from N(10, 1), the last 10 after a
# shift to a mean of 11). Values typed from memory of the textbook's table.
MONTGOMERY = [9.45, 7.99, 9.29, 11.66, 12.16, 10.18, 8.04, 11.46, 9.20, 10.34,
              9.03, 11.47, 10.51, 9.40, 10.08, 9.37, 10.62, 10.31, 8.52, 10.84,
              10.90, 9.33, 12.29, 11.50, 10.60, 11.08, 10.38, 11.62, 11.31, 10.52]

# NIST/SEMATECH e-Handbook of Statistical Methods, 6.3.2.4 EWMA control charts:
# 20 observations, target 50, s = 2.0539, lambda = 0.3 (typed from memory).
NIST = [52.0, 47.0, 53.0, 49.3, 50.1, 47.0, 51.0, 50.1, 51.2, 50.5,
        49.6, 47.6, 49.9, 51.3, 47.8, 51.2, 52.6, 52.4, 53.6, 52.1]


def test_montgomery_tabular_cusum_signals_at_sample_29():
    c = charts.cusum(MONTGOMERY, mu0=10.0, k=0.5, h=5.0)
    assert c.first_signal() == 29          # the textbook's result
    assert c.upper[28] == pytest.approx(5.28, abs=0.005)
    assert c.upper[27] == pytest.approx(4.47, abs=0.005)
    assert c.direction == 1 and c.lower.max() < 5.0


def test_nist_ewma_limits_and_no_point_out_of_control():
    e = charts.ewma(NIST, target=50.0, sigma=2.0539, lam=0.3, L=3.0)
    assert e.upper == pytest.approx(52.59, abs=0.005)   # "about 52.59"
    assert e.lower == pytest.approx(47.41, abs=0.005)   # "about 47.41"
    assert not e.beyond.any()
    assert e.values[0] == pytest.approx(50.6)


@settings(max_examples=80, deadline=None)
@given(st.lists(st.floats(-50, 50, allow_nan=False), min_size=3, max_size=40))
def test_theil_sen_matches_scipy(y):
    t = np.arange(len(y), dtype=float) * 0.37
    slope, intercept = charts.theil_sen(t, y)
    ref = stats.theilslopes(y, t)
    assert slope == pytest.approx(ref.slope, abs=1e-9)
    assert intercept == pytest.approx(ref.intercept, abs=1e-9)


@settings(max_examples=80, deadline=None)
@given(st.lists(st.integers(0, 6), min_size=4, max_size=40))
def test_mann_kendall_matches_kendalltau_and_pymannkendall(y):
    """tau is Kendall's (scipy); S, its tie-corrected variance and the
    continuity-corrected p are pymannkendall's original test."""
    import pymannkendall
    y = np.array(y, dtype=float)
    if np.ptp(y) == 0:
        return
    t = np.arange(len(y), dtype=float)
    mk = charts.mann_kendall(y, t)
    ref = stats.kendalltau(t, y, method="asymptotic")
    assert mk.tau == pytest.approx(ref.statistic, abs=1e-12)
    pm = pymannkendall.original_test(y)
    assert mk.s == pm.s
    assert mk.z == pytest.approx(pm.z, abs=1e-12)
    assert mk.p == pytest.approx(pm.p, rel=1e-9, abs=1e-12)


def _exact_two_sided(n: int) -> dict:
    """The exact null distribution of S for n distinct values: every
    ordering equally likely; P(|S| >= s) for each s."""
    from itertools import permutations
    counts: dict = {}
    for perm in permutations(range(n)):
        s = sum((perm[j] > perm[i]) - (perm[j] < perm[i])
                for i in range(n) for j in range(i + 1, n))
        counts[s] = counts.get(s, 0) + 1
    total = sum(counts.values())
    return {s: sum(c for v, c in counts.items() if abs(v) >= abs(s)) / total for s in counts}


@pytest.mark.parametrize("n", [5, 6, 7])
def test_mann_kendall_p_is_close_to_the_exact_null_distribution(n):
    """With the continuity correction the normal p follows the exact one
    within 0.025 for small n, closer than without it wherever p >= 0.05, and
    every S it calls significant at 5 % is significant exactly. Without the
    correction p is too small: n = 6, S = 11 would pass at 5 %."""
    exact = _exact_two_sided(n)
    plain_false_alarms = 0
    for s, p_exact in exact.items():
        if s <= 0:
            continue
        mk = charts.mann_kendall(_series_with_s(n, s))
        assert mk.s == s
        assert abs(mk.p - p_exact) < 0.025
        p_plain = math.erfc(s / math.sqrt(n * (n - 1) * (2 * n + 5) / 18) / math.sqrt(2))
        if p_exact >= 0.05:
            assert abs(mk.p - p_exact) < abs(p_plain - p_exact)
        if mk.p < 0.05:
            assert p_exact < 0.05
        plain_false_alarms += p_plain < 0.05 <= p_exact
    assert plain_false_alarms >= (1 if n == 6 else 0)
    # the case the correction was found on: n = 6, S = 11 (exact 0.056;
    # uncorrected 0.039, corrected 0.060)
    if n == 6:
        mk = charts.mann_kendall(_series_with_s(6, 11))
        assert mk.p == pytest.approx(0.060, abs=0.001) and exact[11] == pytest.approx(0.056,
                                                                                      abs=0.001)


def _series_with_s(n: int, s: int) -> list[float]:
    """Some ordering of 0..n-1 whose Mann-Kendall S is s."""
    from itertools import permutations
    for perm in permutations(range(n)):
        if sum((perm[j] > perm[i]) - (perm[j] < perm[i])
               for i in range(n) for j in range(i + 1, n)) == s:
            return [float(v) for v in perm]
    raise AssertionError(s)


def test_robust_centre_scale():
    med, sig = charts.robust_centre_scale([1.0, 2.0, 3.0, 4.0, 100.0])
    assert med == 3.0 and sig == pytest.approx(1.4826)


def test_q_statistics_by_hand():
    """Quesenberry (1991), mu unknown and sigma known: Q_r =
    sqrt((r-1)/r) (x_r - mean of the r-1 before) / sigma."""
    q = charts.q_statistics([10.0, 12.0], [14.0, 9.0], 2.0)
    assert q[0] == pytest.approx(math.sqrt(2 / 3) * (14 - 11) / 2)
    assert q[1] == pytest.approx(math.sqrt(3 / 4) * (9 - 12) / 2)


def test_q_statistics_are_independent_standard_normals():
    """However short the reference, Q values of one normal process are iid
    N(0, 1): mean 0, variance 1, no correlation between neighbours; the plain
    z against a three-point baseline mean has variance 1 + 1/3 and
    correlation 1/4 (the baseline's own error repeats in every z)."""
    rng = np.random.default_rng(7)
    x = rng.normal(5.0, 2.0, size=(40000, 12))
    q = np.array([charts.q_statistics(row[:3], row[3:], 2.0) for row in x[:8000]])
    assert abs(q.mean()) < 0.02 and q.var() == pytest.approx(1.0, abs=0.03)
    assert abs(np.corrcoef(q[:, 0], q[:, 1])[0, 1]) < 0.03
    z = (x[:, 3:] - x[:, :3].mean(axis=1, keepdims=True)) / 2.0
    assert z.var() == pytest.approx(4 / 3, abs=0.03)
    assert np.corrcoef(z[:, 0], z[:, 1])[0, 1] == pytest.approx(0.25, abs=0.02)


def test_pooled_sigma_is_von_neumanns():
    sigma, df = charts.pooled_sigma([[1.0, 3.0], [10.0, 10.0, 13.0], [5.0]])
    assert df == 3 and sigma == pytest.approx(math.sqrt((4 + 0 + 9) / 6))
    rng = np.random.default_rng(3)
    # forty tubes of three captures, sigma 0.01, each tube on its own drift
    series = [list(0.01 * rng.normal(size=3) + 0.002 * np.arange(3) + rng.normal())
              for _ in range(40)]
    sigma, df = charts.pooled_sigma(series)
    assert df == 80 and sigma == pytest.approx(0.01, rel=0.25)
