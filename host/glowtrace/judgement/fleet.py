"""The statistics of scoring.score_metric for many tube sections at once.

A fleet is scored metric by metric: the tube sections whose series of that
metric have the same length n are stacked into an [sections x n] array, and
the baseline, z, the Q statistics and their EWMA and CUSUM, the Theil-Sen
slope and the Mann-Kendall test are computed down the rows together (numpy),
the recursions of EWMA and CUSUM running along the columns. Only what turns
numbers into words (reasons, the date a trend meets its limit) runs per
tube section, and only for the flagged ones. The formulas are score_metric's
and the charts module's, term for term; tests/test_scoring_fleet.py holds
the two to the same flags and figures on a generated fleet."""

import math
from datetime import datetime, timezone
import numpy as np
from scipy.special import erfc


def bad(direction: str, sign: np.ndarray) -> np.ndarray:
    """Element-wise scoring._bad: is a change of this sign the bad one?"""
    if direction == "up":
        return sign > 0
    if direction == "down":
        return sign < 0
    return sign != 0


def series_statistics(y: np.ndarray, t: np.ndarray, sigma: np.ndarray, n_base: int,
                      charts_cfg: dict, direction: str) -> dict:
    """y: [g, n] values (ln x for relative metrics), t: [g, n] years from the
    first scored capture, sigma: [g] noise; every row has n >= n_base values
    and uses the default baseline (its first n_base). Returns arrays of g:
    centre_y, z_latest, ewma_signal, cusum_signal, and where a trend is
    judged (has_trend) slope, icpt, trend_p, trend_significant."""
    g, n = y.shape
    ch = charts_cfg
    centre = y[:, :n_base].sum(axis=1) / n_base
    out = {"centre_y": centre,
           "z_latest": (y[:, -1] - centre) / (sigma * math.sqrt(1.0 + 1.0 / n_base)),
           "ewma_signal": np.zeros(g, bool), "cusum_signal": np.zeros(g, bool)}
    if n > n_base:
        # Q statistics: each later value against the mean of all before it
        csum = np.cumsum(y, axis=1)
        lam, k_c, h_c = ch["ewma_lambda"], ch["cusum_k"], ch["cusum_h"]
        z = np.zeros(g)
        cp = np.zeros(g)
        cm = np.zeros(g)
        for k in range(n_base, n):
            q = math.sqrt(k / (k + 1.0)) * (y[:, k] - csum[:, k - 1] / k) / sigma
            z = lam * q + (1 - lam) * z
            cp = np.maximum(0.0, q - k_c + cp)
            cm = np.maximum(0.0, -k_c - q + cm)
        half = ch["ewma_limit"] * math.sqrt(lam / (2 - lam))
        out["ewma_signal"] = ((z > half) & bad(direction, np.ones(g))) | (
            (z < -half) & bad(direction, -np.ones(g)))
        out["cusum_signal"] = ((cp > h_c) & bad(direction, np.ones(g))) | (
            (cm > h_c) & bad(direction, -np.ones(g)))
    has = (t[:, -1] > t[:, 0]) if n >= ch["trend_min"] else np.zeros(g, bool)
    out["has_trend"] = has
    out["slope"] = np.full(g, np.nan)
    out["icpt"] = np.full(g, np.nan)
    out["trend_p"] = np.full(g, np.nan)
    out["trend_significant"] = np.zeros(g, bool)
    if has.any():
        yy, ty = y[has], t[has]
        i, j = np.triu_indices(n, 1)
        dt = ty[:, j] - ty[:, i]
        dy = yy[:, j] - yy[:, i]
        with np.errstate(invalid="ignore", divide="ignore"):
            slopes = np.where(dt != 0, dy / np.where(dt != 0, dt, 1.0), np.nan)
        slope = np.nanmedian(slopes, axis=1)
        icpt = np.median(yy, axis=1) - slope * np.median(ty, axis=1)
        s = np.sign(dy).sum(axis=1)
        ties = tie_terms(yy)
        var = (n * (n - 1) * (2 * n + 5) - ties) / 18.0
        with np.errstate(invalid="ignore", divide="ignore"):
            zmk = np.where(var > 0, (s - np.sign(s)) / np.sqrt(np.where(var > 0, var, 1.0)), 0.0)
        p = erfc(np.abs(zmk) / math.sqrt(2))
        moved = np.abs(slope * (ty[:, -1] - ty[:, 0])) > 2 * sigma[has]
        out["slope"][has], out["icpt"][has], out["trend_p"][has] = slope, icpt, p
        out["trend_significant"][has] = (p < ch["trend_p"]) & bad(direction, slope) & moved
    return out


def tie_terms(y: np.ndarray) -> np.ndarray:
    """Per row, sum c (c - 1) (2c + 5) over its groups of c equal values
    (Mann-Kendall's variance correction, as charts.mann_kendall counts them):
    the rows sorted, runs of equal neighbours numbered, counted together."""
    g, n = y.shape
    ys = np.sort(y, axis=1)
    new_run = np.ones((g, n), bool)
    new_run[:, 1:] = ys[:, 1:] != ys[:, :-1]
    run = np.cumsum(new_run, axis=1) - 1 + n * np.arange(g)[:, None]
    c = np.bincount(run.ravel(), minlength=g * n).reshape(g, n).astype(float)
    return (c * (c - 1) * (2 * c + 5)).sum(axis=1)


def fleet_years(ats: list[str], gid: np.ndarray) -> np.ndarray:
    """Years from the first time of each group (rows of a group together, in
    time order), for the whole fleet at once; times in UTC parsed by numpy,
    any other offset by datetime."""
    if all(a.endswith(("+00:00", "Z")) for a in ats):
        bare = [a[:-6] if a.endswith("+00:00") else a[:-1] for a in ats]
        us = np.array(bare, dtype="datetime64[us]").astype(np.int64)
    else:
        us = np.array([_us(a) for a in ats], dtype=np.int64)
    first = np.full(int(gid.max()) + 1 if len(gid) else 0, -1)
    first[gid[::-1]] = np.arange(len(gid))[::-1]  # the first row of each group
    return (us - us[first[gid]]) / 1e6 / (365.25 * 86400)


def _us(at: str) -> int:
    d = datetime.fromisoformat(at.replace("Z", "+00:00"))
    d = d if d.tzinfo else d.replace(tzinfo=timezone.utc)
    return round(d.timestamp() * 1e6)
