"""Model-free figures of one start-up curve (docs/ANALYSIS.md defines each).

Waveform terms follow IEEE Std 181: the heater's resistance has an initial
state level (cold, extrapolated to switch-on) and a final state level (hot,
the mean over the last second); reference levels at 50 % and 90 % of the way
between them give the warm-up times, and the settling time is when the
current enters and stays in a 1 % tolerance band about its final level."""

from dataclasses import dataclass, field

import numpy as np
from scipy.ndimage import median_filter

from .physics.tungsten import HeaterWire
from .curve import Curve

TAIL_S = 1.0           # the final state level is the mean over this last stretch
COLD_FIT_S = 0.002     # cold resistance: straight line through the first 2 ms...
COLD_FIT_MIN = 8       # ... or through at least this many samples
SMOOTH_REL = 0.02      # smoothing window for crossings: +-2 % of the time
SETTLE_BAND = 0.01       # hot-current settling: within 1 % of the final current
SETTLE_181_TOL = 0.01    # IEEE 181 settling: +-1 % of the transition's amplitude
SAG_LIMIT = 0.03       # supply sag during inrush worth a warning
RATED_V_LIMIT = 0.10   # heater voltage this far from rated is worth a warning
COLD_RATIO_MIN = 3.0   # a cold tungsten heater's hot/cold ratio is well above this
HISTORY_WARM = 1.08    # cold R this much above the tube's earlier cold starts
DROPOUT_REL = 0.2      # a set this far below its neighbours' median is a dropout...
DROPOUT_NOISE = 6.0    # ... and this many noise units below it
DROPOUT_WINDOW = 9     # the neighbours: this many sets, centred
DROPOUT_AFTER_S = 0.005  # the switching edge is not a dropout


@dataclass
class Measured:
    values: dict
    warnings: list = field(default_factory=list)
    # intermediate results the model fit uses
    t: np.ndarray | None = None
    i: np.ndarray | None = None
    r: np.ndarray | None = None
    v_end: float | None = None
    r_end: float | None = None


def log_windows(t: np.ndarray, rel: float = SMOOTH_REL,
                min_half: int = 2) -> tuple[np.ndarray, np.ndarray]:
    """The sample windows [lo, hi) of log_smooth: computed once per curve,
    as every smoothed channel of it shares them."""
    n = len(t)
    idx = np.arange(n)
    lo = np.minimum(np.searchsorted(t, t / (1 + rel), "left"), np.maximum(idx - min_half, 0))
    hi = np.maximum(np.searchsorted(t, t * (1 + rel), "right"),
                    np.minimum(idx + min_half + 1, n))
    return lo, hi


def log_smooth(t: np.ndarray, y: np.ndarray, rel: float = SMOOTH_REL,
               min_half: int = 2, windows=None) -> np.ndarray:
    """Centred moving mean over [t/(1+rel), t*(1+rel)], at least
    2*min_half+1 samples wide: even smoothing on a log time axis."""
    lo, hi = windows if windows is not None else log_windows(t, rel, min_half)
    c = np.concatenate([[0.0], np.cumsum(y)])
    return (c[hi] - c[lo]) / (hi - lo)


def first_crossing(t: np.ndarray, y: np.ndarray, level: float) -> float | None:
    """First time y reaches level, linearly interpolated between samples."""
    above = np.nonzero(y >= level)[0]
    if len(above) == 0:
        return None
    k = above[0]
    if k == 0:
        return float(t[0])
    y0, y1 = y[k - 1], y[k]
    return float(t[k - 1] + (level - y0) / (y1 - y0) * (t[k] - t[k - 1]))


def last_entry(t: np.ndarray, y: np.ndarray, level: float, band: float) -> float | None:
    """When y last entered [level - band, level + band] and stayed; None if it
    is outside at the end (or never inside)."""
    outside = np.nonzero(np.abs(y - level) > band)[0]
    if len(outside) == 0:
        return float(t[0])
    if outside[-1] >= len(t) - 1:
        return None
    return float(t[outside[-1] + 1])


def settling_181(t: np.ndarray, i_s: np.ndarray, peak: float, i_hot: float) -> float | None:
    """IEEE Std 181 settling time of the current's transition from its peak
    (initial state level) to the hot current (final state level): from the
    50 % reference-level instant to the last entry into a band of
    +-SETTLE_181_TOL of the amplitude about the final level."""
    amp = peak - i_hot
    if amp <= 0.05 * i_hot:
        return None
    t50 = first_crossing(t, -i_s, -(i_hot + 0.5 * amp))  # the falling 50 % instant
    t_in = last_entry(t, i_s, i_hot, SETTLE_181_TOL * amp)
    if t50 is None or t_in is None or t_in > t[-1] - TAIL_S:
        return None
    return max(t_in - t50, 0.0)


def dropouts(t: np.ndarray, i: np.ndarray, noise: float) -> np.ndarray:
    """Start times of the sets where the current falls far below its
    neighbours and comes back: a heater's current changes smoothly (its
    temperature cannot jump), so such a step is a contact opening for a
    moment, in the socket or the leads."""
    if len(i) < DROPOUT_WINDOW:
        return np.zeros(0)
    med = median_filter(i, size=DROPOUT_WINDOW, mode="nearest")
    low = ((med - i > DROPOUT_REL * np.abs(med)) & (med - i > DROPOUT_NOISE * noise)
           & (t > DROPOUT_AFTER_S))
    starts = low & ~np.concatenate([[False], low[:-1]])
    return t[starts]


def measure(c: Curve, ambient_c: float, wire: HeaterWire, rated_v: float | None = None,
            rated_a: float | None = None, history_cold_r20: float | None = None) -> Measured:
    w: list[str] = []
    vals = dict.fromkeys([
        "peak_current_a", "cold_resistance_ohm", "cold_resistance_20c_ohm", "hot_current_a",
        "hot_resistance_ohm", "hot_power_w", "hot_cold_ratio", "inrush_ratio",
        "warmup_50_s", "warmup_90_s", "settle_1pct_s", "settling_181_s"])
    vals["cold_start_ok"] = False
    pre, on = c.t < 0, c.t >= 0
    if on.sum() < 10:
        raise ValueError("fewer than 10 samples after switch-on (time_s >= 0)")
    i_all = c.i.copy()
    if pre.sum() >= 3:
        i_all = i_all - np.median(c.i[pre])  # the current's zero, from the heater-off part
    t, i, v = c.t[on], i_all[on], c.v[on]
    peak = float(i.max())
    vals["peak_current_a"] = peak
    floor_a = max(0.005, 0.02 * rated_a) if rated_a else 0.005
    if peak < floor_a:
        w.append(f"open heater: no current after switch-on (peak {peak:.4f} A)")
        return Measured(vals, w)
    # the switching edge: leading samples far below the peak are not yet on
    start = 0
    while start < min(len(i) - 10, 20) and i[start] < 0.3 * peak and t[start] < 0.001:
        start += 1
    t, i, v = t[start:], i[start:], v[start:]
    clipped = np.zeros(len(i), bool)
    if c.clip_a is not None:
        clipped = i >= c.clip_a
    else:
        # a flat top at switch-on, with the rest of the curve well below it
        top = np.isclose(i, peak, rtol=1e-4, atol=0)
        if top[:5].sum() >= 3 and np.median(i) < 0.9 * peak:
            clipped = top
    if clipped.any():
        w.append(f"converter clipped at {peak:.3f} A: the peak current reads low "
                 "(use a higher current range)")
    ok = i > 0.02 * peak
    r = np.where(ok, v / np.where(ok, i, 1.0), np.nan)

    # cold state: straight line through the first unclipped samples, at t = 0
    good = np.nonzero(ok & ~clipped)[0]
    first = good[:max(COLD_FIT_MIN, int(np.searchsorted(t[good], t[good[0]] + COLD_FIT_S)))]
    if len(first) >= 2 and np.ptp(t[first]) > 0:
        slope, r_cold = np.polyfit(t[first], r[first], 1)
    else:
        r_cold = float(r[good[0]])
    r_cold = float(r_cold)
    vals["cold_resistance_ohm"] = r_cold
    r20 = wire.to_20c(r_cold, ambient_c)
    vals["cold_resistance_20c_ohm"] = r20

    # final state: the last second
    duration = float(t[-1])
    tail = t >= t[-1] - TAIL_S
    if duration < 3 * TAIL_S:
        w.append(f"curve too short ({duration:.2f} s) to judge the hot state")
    i_hot = float(i[tail].mean())
    v_hot = float(v[tail].mean())
    r_hot = v_hot / i_hot if i_hot > 0 else float("nan")
    vals["hot_current_a"] = i_hot
    vals["hot_resistance_ohm"] = r_hot
    vals["hot_power_w"] = float((v[tail] * i[tail]).mean())
    vals["hot_cold_ratio"] = r_hot / r20
    vals["inrush_ratio"] = peak / i_hot

    # warm-up: reference levels between the two resistance state levels
    windows = log_windows(t)
    rs = log_smooth(t, np.nan_to_num(r, nan=r_cold), windows=windows)
    rise = r_hot - r_cold
    if rise > 0.05 * r_hot:
        vals["warmup_50_s"] = first_crossing(t, rs, r_cold + 0.5 * rise)
        vals["warmup_90_s"] = first_crossing(t, rs, r_cold + 0.9 * rise)
    else:
        w.append("no resistance rise after switch-on: not a cold tungsten heater "
                 "(a resistor, a short, or a heater that was already hot)")

    # settling: last exit from the 1 % band about the final current
    i_s = log_smooth(t, i, windows=windows)
    band = SETTLE_BAND * i_hot
    outside = np.nonzero(np.abs(i_s - i_hot) > band)[0]
    noise = float(np.std(i[tail] - i_s[tail]))
    if len(outside) == 0:
        vals["settle_1pct_s"] = float(t[0])
    elif outside[-1] >= len(t) - 1 or t[outside[-1]] > t[-1] - TAIL_S:
        w.append("curve too short to settle within 1 %: capture longer")
    else:
        k = outside[-1]
        vals["settle_1pct_s"] = float(t[k + 1])
    if noise > 0.5 * band:
        w.append(f"current noise ({noise:.2g} A rms) is large against the 1 % band")
    drops = dropouts(t, i, noise)
    if len(drops):
        w.append(f"intermittent contact: the current dropped out {len(drops)} time(s), first "
                 f"at {drops[0]:.3g} s, which no heater does: reseat the tube (clean its "
                 "pins and the socket) and capture again")
    vals["settling_181_s"] = settling_181(t, i_s, peak, i_hot)

    # supply and rating checks
    early = t <= 0.02
    vs = log_smooth(t, v, windows=windows)
    if early.any() and v_hot > 0:
        sag = (v_hot - float(vs[early].min())) / v_hot
        if sag > SAG_LIMIT:
            w.append(f"supply sagged {100 * sag:.0f} % during inrush: the figures are "
                     "measured, the predictions at rated voltage correct for it")
    hot_state = duration >= 3 * TAIL_S  # a curve cut short has no hot state to judge
    if rated_v and hot_state:
        if abs(v_hot / rated_v - 1) > RATED_V_LIMIT:
            w.append(f"heater voltage {v_hot:.2f} V is far from its rated {rated_v:g} V")
        if rated_a and r_hot < 0.3 * rated_v / rated_a:
            w.append("resistance far below the rating: shorted heater or wiring")
    elif hot_state and r_hot < 0.05:
        w.append("resistance below 0.05 ohm: shorted heater or wiring")

    # was it a cold start?
    cold = vals["hot_cold_ratio"] >= COLD_RATIO_MIN
    if not cold:
        w.append(f"not a cold start: hot/cold ratio {vals['hot_cold_ratio']:.2f} is too low "
                 "for a cold tungsten heater (still warm from a recent run?)")
    if history_cold_r20 and r20 > HISTORY_WARM * history_cold_r20:
        cold = False
        w.append(f"not a cold start: cold resistance {r20:.3f} ohm is "
                 f"{100 * (r20 / history_cold_r20 - 1):.0f} % above this tube's earlier "
                 "cold starts (still warm?)")
    vals["cold_start_ok"] = bool(cold)
    return Measured(vals, w, t=t, i=i, r=r, v_end=v_hot, r_end=r_hot)

