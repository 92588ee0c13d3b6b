# Adaptive end of a capture: it ends once the current has been within a
# relative band of its final value for a hold time (the tail the analysis
# reads the hot state from), the final value being predicted, not waited for.
#
# Late in a warm-up the current approaches its final value as one decaying
# exponential (the sleeve's time constant), so the means A, B, C of the
# current over three adjacent windows of length h ending at t differ by
# changes d1 = B - A and d2 = C - B that shrink by a constant ratio
# q = d2 / d1 = exp(-h / tau). What is left to change after t is then
#     rest = |d2| * q / (1 - q) / g,   g = (1/q - 1) / ln(1/q)
# (Aitken's delta-squared extrapolation on window means; g takes the last
# window's mean to its end), and the current entered the band
# |rest| <= band * |I| at
#     t_in = t - tau * ln(band * |I| / |rest|),  tau = h / ln(1 / q).
# A fast fall can hide a slower one of larger amplitude (the local curvature
# is the fast one's), so the time constant must also have held steady: tau
# now within TAU_STEADY of tau at (1 - WINDOW) t; while a slower component
# takes over, tau keeps growing and the capture goes on.
# The capture ends when t - t_in >= hold. h grows with time (WINDOW * t), so
# a slow heater is judged on windows as slow as it is, and window means keep
# converter noise out of the ratio (a small current on the high range is a
# few tens of codes). A curve that is not yet one shrinking exponential (q
# outside (0, Q_MAX), or changes in opposite directions) does not end,
# unless it has stopped moving within the noise (both changes under
# NOISE * band of the current).

import math

WINDOW = 0.2      # window length h as a share of the time from switch-on
Q_MAX = 0.97      # a ratio closer to 1 is not yet converging
NOISE = 0.1       # changes below this share of the band count as none
TAU_STEADY = 0.05  # tau may differ this much from its value a window ago
MARGIN = 0.8      # the prediction must say within this share of the band
SPACING = 1.02    # history kept at times 2 % apart (about 320 points to 300 s)


class SettleDetector:
    def __init__(self, band, hold_us, min_us):
        self.band = band
        self.hold_us = hold_us
        self.min_us = min_us
        self.last_t = None
        self.last_v = 0.0
        self.area = 0.0  # integral of the fed value over time (value x us)
        self.ts = []     # log-spaced history of (time, area)
        self.areas = []
        self.taus = []   # the time constant estimated at each kept time (0: none)

    def _tau_at(self, t):
        """The time constant estimated at the last kept time before t."""
        k = len(self.ts) - 1
        while k >= 0 and self.ts[k] > t:
            k -= 1
        return self.taus[k] if k >= 0 else 0.0

    def _area_at(self, t):
        """The integral up to time t, linear between kept points (None
        before the first)."""
        ts, areas = self.ts, self.areas
        k = len(ts) - 1
        while k >= 0 and ts[k] > t:
            k -= 1
        if k < 0:
            return None
        if k == len(ts) - 1:
            return areas[k]
        f = (t - ts[k]) / (ts[k + 1] - ts[k])
        return areas[k] + f * (areas[k + 1] - areas[k])

    def rest(self, t_us, value):
        """(what is left to change, time constant in us) at t_us; rest is
        None when the curve does not yet say."""
        h = WINDOW * t_us
        s0 = self._area_at(t_us - 3 * h)
        if s0 is None or t_us - 3 * h < self.ts[0]:
            return None, 0.0
        s1, s2 = self._area_at(t_us - 2 * h), self._area_at(t_us - h)
        a, b, c = (s1 - s0) / h, (s2 - s1) / h, (self.area - s2) / h
        d1, d2 = b - a, c - b
        still = NOISE * self.band * abs(value)
        if abs(d1) <= still and abs(d2) <= still:
            return 0.0, 0.0  # not moving beyond the noise: nothing left to wait for
        if d1 == 0 or d2 / d1 <= 0 or d2 / d1 >= Q_MAX:
            return None, 0.0
        q = d2 / d1
        g = (1 / q - 1) / math.log(1 / q)
        return abs(d2) * q / (1 - q) / g, h / math.log(1 / q)

    def update(self, t_us, value):
        """Feed a block mean (offset removed); True once settled."""
        if self.last_t is not None:
            self.area += 0.5 * (value + self.last_v) * (t_us - self.last_t)
        self.last_t, self.last_v = t_us, value
        rest, tau = self.rest(t_us, value)
        if not self.ts or t_us >= SPACING * self.ts[-1]:
            self.ts.append(t_us)
            self.areas.append(self.area)
            self.taus.append(tau if rest is not None else 0.0)
        if t_us < self.min_us or rest is None:
            return False
        if rest == 0.0:
            return True
        limit = MARGIN * self.band * abs(value)
        if rest > limit:
            return False
        before = self._tau_at((1 - WINDOW) * t_us)
        if before <= 0 or abs(tau / before - 1) > TAU_STEADY:
            return False
        t_in = t_us - tau * math.log(limit / rest)
        return t_us - t_in >= self.hold_us
