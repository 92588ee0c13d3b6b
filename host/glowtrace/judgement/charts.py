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
from collections import Counter
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
    out = []
    z = target
    for v in x:
        z = lam * float(v) + (1 - lam) * z
        out.append(z)
    half = L * sigma * math.sqrt(lam / (2 - lam))
    return Ewma(np.array(out), target + half, target - half)


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
    up, lo = [], []
    cp = cm = 0.0
    for v in x:
        v = float(v)
        cp = max(0.0, v - (mu0 + k) + cp)
        cm = max(0.0, (mu0 - k) - v + cm)
        up.append(cp)
        lo.append(cm)
    return Cusum(np.array(up), np.array(lo), h)


def median(values) -> float:
    """Median of a short sequence. A history has tens of points and a fleet
    millions of such calls: sorting a list beats numpy's per-call overhead."""
    v = sorted(values)
    n = len(v)
    if n == 0:
        raise ValueError("median of nothing")
    h = n // 2
    return float(v[h]) if n % 2 else 0.5 * (v[h - 1] + v[h])


def theil_sen(t, y) -> tuple[float, float]:
    """(slope, intercept): the median pairwise slope, and the line through
    (median t, median y) (Conover's estimate, scipy's default)."""
    t, y = [float(a) for a in t], [float(b) for b in y]
    slopes = [(y[j] - y[i]) / (t[j] - t[i]) for i in range(len(t))
              for j in range(i + 1, len(t)) if t[j] != t[i]]
    if not slopes:
        return 0.0, median(y)
    slope = median(slopes)
    return slope, median(y) - slope * median(t)


@dataclass
class MannKendall:
    s: int
    z: float
    p: float     # two-sided
    tau: float   # Kendall's tau-b against time


def mann_kendall(y, t=None) -> MannKendall:
    """Trend test of y in time order (sorted by t if given): Mann (1945),
    Kendall (1975), as in Gilbert (1987) ch. 16: S, its variance with the tie
    correction, and z = (S - sgn S) / sqrt(Var S) with the continuity
    correction (S moves in steps of two), two-sided p from the normal."""
    y = [float(v) for v in y]
    if t is not None:
        order = sorted(range(len(y)), key=lambda k: float(t[k]))
        y = [y[k] for k in order]
    n = len(y)
    s = 0
    for i in range(n):
        yi = y[i]
        for j in range(i + 1, n):
            d = y[j] - yi
            s += (d > 0) - (d < 0)
    ties = [c for c in Counter(y).values() if c > 1]
    var = (n * (n - 1) * (2 * n + 5) - sum(c * (c - 1) * (2 * c + 5) for c in ties)) / 18.0
    z = (s - (s > 0) + (s < 0)) / math.sqrt(var) if var > 0 else 0.0
    p = math.erfc(abs(z) / math.sqrt(2))
    n0 = n * (n - 1) / 2
    n2 = sum(c * (c - 1) / 2 for c in ties)
    tau = s / math.sqrt(n0 * (n0 - n2)) if n0 > n2 else 0.0
    return MannKendall(s, z, p, tau)


def robust_centre_scale(x) -> tuple[float, float]:
    """Median and the MAD scaled to a normal sigma (x 1.4826)."""
    med = median(x)
    return med, 1.4826 * median([abs(v - med) for v in x])


def q_statistics(reference: list[float], later: list[float], sigma: float) -> list[float]:
    """Quesenberry's Q statistics for a known sigma and an unknown mean (J.
    Quality Technology 23 (1991), the case "mu unknown, sigma known"): each
    later value against the mean of all values before it (the reference,
    then the later ones in turn),
        Q_r = sqrt((r - 1) / r) * (x_r - mean(x_1..x_{r-1})) / sigma.
    For values from one normal process they are independent N(0, 1), however
    short the reference: a self-starting chart."""
    ref = [float(v) for v in reference]
    total = sum(ref)
    out = []
    for v in later:
        n = len(ref)
        out.append(math.sqrt(n / (n + 1.0)) * (float(v) - total / n) / sigma)
        ref.append(float(v))
        total += float(v)
    return out


def pooled_sigma(series: list[list[float]]) -> tuple[float, int]:
    """A noise sigma pooled over several short series (the tubes of a type):
    half the mean squared successive difference (von Neumann's estimator),
    which a slow drift within a series barely moves. Returns (sigma, degrees
    of freedom); (0, 0) without two values in any series."""
    ss, df = 0.0, 0
    for s in series:
        for a, b in zip(s, s[1:]):
            ss += (float(b) - float(a)) ** 2
            df += 1
    return (math.sqrt(ss / (2.0 * df)), df) if df else (0.0, 0)
