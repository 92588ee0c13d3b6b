"""Matched sets: tubes of one type grouped into pairs, trios or quads whose
heater figure at rated voltage lies closest.

This is heater matching only: sets whose heaters draw the same current, warm
up alike or flash alike (a string of heaters, an amplifier's even warm-up).
It is not the plate-current or transconductance matching audio buyers
usually mean, which needs a tube tester's own measurements.

Method: the most sets within the tolerance, and among those the smallest total
spread, by dynamic programming over the tubes sorted by the figure. Some best
grouping always takes each set as a run of neighbours in that order: two sets
whose values interleave can be split into the lower and the upper k of their
union without widening either, and a set that spans a left-over tube can take
it in place of its highest or lowest member. So f(i), the best for the i
smallest, is the better of f(i-1) (tube i left over) and f(i-k) plus the set
of tubes i-k+1..i when that set is within the tolerance: O(n) after the sort.
That holds for a tolerance on the highest and lowest value of a set alone: the
difference (absolute) or the highest over the lowest (relative: "within 2 %"
means the largest is at most 2 % above the smallest). A tolerance relative to
the set's mean would not hold: moving a tube changes the mean (hypothesis found
interleaved sets that beat the runs). tests/test_matching.py checks it against
every partition of small cases."""

from dataclasses import dataclass

# what a set is matched on: analysis key, words, unit, how the tolerance reads
FIGURES = {
    "current": ("rated_hot_current_a", "hot current at rated voltage", "A", "relative"),
    "warmup": ("rated_warmup_90_s", "warm-up to 90 % at rated voltage", "s", "relative"),
    "flash": ("flash_index", "flash index", "", "absolute"),
}
# defaults: a few per cent for current and warm-up; the flash index is near
# zero for an even heater, so its tolerance is in its own units
DEFAULT_TOLERANCE = {"current": 0.02, "warmup": 0.05, "flash": 0.02}
SCOPE = ("heater matching: hot current, warm-up and flash of the heaters, not the "
         "plate-current or transconductance matching of the tubes' amplification")


@dataclass
class MatchedSet:
    tubes: list[str]
    values: list[float]
    spread: float      # max - min, in the figure's unit
    relative: float    # spread over the set's smallest value


def spread_of(values, kind: str) -> float:
    """The spread the tolerance is compared with: (max - min) over min
    (relative) or max - min (absolute)."""
    lo, hi = min(values), max(values)
    if kind == "absolute":
        return hi - lo
    return (hi - lo) / lo if lo > 0 else float("inf")


def best_sets(values: dict[str, float], size: int, tolerance: float,
              kind: str = "relative") -> tuple[list[MatchedSet], list[str]]:
    """The most sets of `size` tubes whose spread is within tolerance, then
    the least total spread; returns (sets, tubes left over)."""
    if size < 2:
        raise ValueError("a matched set has at least two tubes")
    if not tolerance >= 0:
        raise ValueError("the tolerance must be zero or more")
    order = sorted(values, key=lambda t: (values[t], t))
    x = [values[t] for t in order]
    n = len(x)
    # best[i]: (sets, -total spread) of the i smallest; took[i]: a set ends at i
    best = [(0, 0.0)] * (n + 1)
    took = [False] * (n + 1)
    for i in range(1, n + 1):
        best[i], took[i] = best[i - 1], False
        if i >= size:
            window = x[i - size:i]
            if spread_of(window, kind) <= tolerance * (1 + 1e-12):
                cand = (best[i - size][0] + 1, best[i - size][1] - (window[-1] - window[0]))
                if cand > best[i]:
                    best[i], took[i] = cand, True
    sets, left = [], []
    i = n
    while i > 0:
        if took[i]:
            idx = range(i - size, i)
            vals = [x[j] for j in idx]
            sets.append(MatchedSet([order[j] for j in idx], vals, vals[-1] - vals[0],
                                   spread_of(vals, "relative")))
            i -= size
        else:
            left.append(order[i - 1])
            i -= 1
    sets.reverse()
    left.reverse()
    return sets, left


def tube_figures(assessments: list[dict], figure: str) -> tuple[dict, list[str]]:
    """label -> the tube's figure (the mean of its sections' latest values);
    and the tubes that have none yet."""
    key = FIGURES[figure][0]
    out, missing = {}, []
    for a in assessments:
        vals = [s["metrics"].get(key, {}).get("latest") for s in a["sections"].values()]
        vals = [v for v in vals if v is not None]
        if vals:
            out[a["tube"]] = sum(vals) / len(vals)
        else:
            missing.append(a["tube"])
    return out, missing
