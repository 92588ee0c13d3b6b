"""Control charts and trend statistics for a tube's history.

- EWMA chart (Roberts 1959; NIST/SEMATECH e-Handbook 6.3.2.4): z_i = lam x_i +
  (1 - lam) z_(i-1) from the target, asymptotic limits target +- L sigma
  sqrt(lam / (2 - lam)).
- Tabular CUSUM (Page 1954; Montgomery, Introduction to Statistical Quality
  Control, ch. 9): C+_i = max(0, x_i - (mu0 + K) + C+_(i-1)),
  C-_i = max(0, (mu0 - K) - x_i + C-_(i-1)); a signal when either exceeds H.
- Theil-Sen slope: the median of all pairwise slopes; Mann-Kendall test: the
  S statistic with the tie-corrected variance, normal approximation without
  continuity correction (scipy.stats.theilslopes and kendalltau are the
  reference the tests hold these to).
"""

import math
from dataclasses import dataclass

import numpy as np


@dataclass
class Ewma:
    values: np.ndarray
    upper: float
    lower: float

    @property
    def beyond(self) -> np.ndarray:
        return (self.values > self.upper) | (self.values < self.lower)


def ewma(x, target: float, sigma: float, lam: float = 0.3, L: float = 3.0) -> Ewma:
    x = np.asarray(x, dtype=float)
    out = np.empty(len(x))
    z = target
    for k, v in enumerate(x):
        z = lam * v + (1 - lam) * z
        out[k] = z
    half = L * sigma * math.sqrt(lam / (2 - lam))
    return Ewma(out, target + half, target - half)


@dataclass
class Cusum:
    upper: np.ndarray
    lower: np.ndarray
    h: float

    def first_signal(self) -> int | None:
        """1-based index of the first sample whose C+ or C- exceeds H."""
        hit = np.nonzero((self.upper > self.h) | (self.lower > self.h))[0]
        return int(hit[0]) + 1 if len(hit) else None

    @property
    def direction(self) -> int:
        """+1 if the upper sum signals (first), -1 the lower, 0 none."""
        up = np.nonzero(self.upper > self.h)[0]
        lo = np.nonzero(self.lower > self.h)[0]
        if not len(up) and not len(lo):
            return 0
        if not len(lo) or (len(up) and up[0] <= lo[0]):
            return 1
        return -1


def cusum(x, mu0: float, k: float, h: float) -> Cusum:
    x = np.asarray(x, dtype=float)
    up, lo = np.empty(len(x)), np.empty(len(x))
    cp = cm = 0.0
    for i, v in enumerate(x):
        cp = max(0.0, v - (mu0 + k) + cp)
        cm = max(0.0, (mu0 - k) - v + cm)
        up[i], lo[i] = cp, cm
    return Cusum(up, lo, h)


def theil_sen(t, y) -> tuple[float, float]:
    """(slope, intercept): the median pairwise slope, and the line through
    (median t, median y) (Conover's estimate, scipy's default)."""
    t, y = np.asarray(t, float), np.asarray(y, float)
    i, j = np.triu_indices(len(t), 1)
    dt = t[j] - t[i]
    ok = dt != 0
    if not ok.any():
        return 0.0, float(np.median(y))
    slope = float(np.median((y[j] - y[i])[ok] / dt[ok]))
    return slope, float(np.median(y) - slope * np.median(t))


@dataclass
class MannKendall:
    s: int
    z: float
    p: float     # two-sided
    tau: float   # Kendall's tau-b against time


def mann_kendall(y, t=None) -> MannKendall:
    """Trend test of y in time order (t breaks ties in order if given)."""
    y = np.asarray(y, float)
    n = len(y)
    if t is not None:
        y = y[np.argsort(np.asarray(t, float), kind="stable")]
    i, j = np.triu_indices(n, 1)
    s = int(np.sign(y[j] - y[i]).sum())
    _, counts = np.unique(y, return_counts=True)
    ties = counts[counts > 1]
    var = (n * (n - 1) * (2 * n + 5) - (ties * (ties - 1) * (2 * ties + 5)).sum()) / 18.0
    z = s / math.sqrt(var) if var > 0 else 0.0
    p = math.erfc(abs(z) / math.sqrt(2))
    n0 = n * (n - 1) / 2
    n2 = (ties * (ties - 1) / 2).sum()
    tau = s / math.sqrt(n0 * (n0 - n2)) if n0 > n2 else 0.0
    return MannKendall(s, z, p, tau)


def robust_centre_scale(x) -> tuple[float, float]:
    """Median and the MAD scaled to a normal sigma (x 1.4826)."""
    x = np.asarray(x, float)
    med = float(np.median(x))
    return med, 1.4826 * float(np.median(np.abs(x - med)))
