# A short steady measurement for calibration and self-test: optionally switch
# a section on, let it settle, average a few hundred sets, switch off. The same
# safety as a capture: over-current trips set by set, a hard limit on time.
import array
import time

from glowfw.capture import SECTION_MASKS
from glowfw.params import ParamError, merge

MAX_SETS = 400
MAX_ON_US = 500000
DEFAULTS = {"section": "", "range": "low", "sets": 100, "interval_us": 1000,
            "oversample": 16, "settle_ms": 20}


class MeasureError(ParamError):
    pass


def parse(raw, board):
    p = merge(DEFAULTS, raw, "measure")
    if p["section"] not in ("", "A", "B", "AB"):
        raise MeasureError("section must be '', A, B or AB")
    if p["range"] not in board.ranges:
        raise MeasureError("unknown current range")
    if not (1 <= p["sets"] <= MAX_SETS and 1 <= p["oversample"] <= 16):
        raise MeasureError("sets must be 1..400 and oversample 1..16")
    if p["settle_ms"] * 1000 + p["sets"] * p["interval_us"] > MAX_ON_US:
        raise MeasureError("a measurement may keep the heater on for 0.5 s at most")
    return p


def run(board, p):
    """Means and standard deviations of each channel, in codes per
    conversion; `tripped` when over-current switched the heater off."""
    nch = len(board.channels)
    buf = array.array("H", bytes(2 * nch * p["sets"]))
    board.set_range(p["range"])
    mask = SECTION_MASKS.get(p["section"], 0)
    cur = [board.channels.index("i" + s.lower()) for s in p["section"]]
    trip = board.amps_to_code(p["range"], 0.95 * board.full_scale_a(p["range"]))
    tripped = False
    try:
        t_on = board.heater(mask)
        if p["settle_ms"]:
            n = max(1, p["settle_ms"] * 1000 // p["interval_us"])
            n = min(n, p["sets"])
            _, _, tripped = board.sample(buf, n, board.now_us(), p["interval_us"],
                                         p["oversample"], trip, cur)
        done = 0
        if not tripped:
            done, _, tripped = board.sample(buf, p["sets"], board.now_us(), p["interval_us"],
                                            p["oversample"], trip, cur)
    finally:
        t_off = board.heater(0)
    osm = p["oversample"]
    means, stds = [], []
    for c in range(nch):
        s = 0.0
        s2 = 0.0
        for k in range(done):
            v = buf[k * nch + c] / osm
            s += v
            s2 += v * v
        m = s / done if done else 0.0
        var = s2 / done - m * m if done else 0.0
        means.append(m)
        stds.append(var ** 0.5 if var > 0 else 0.0)
    return {"means": means, "stds": stds, "sets": done, "oversample": osm,
            "tripped": tripped, "on_us": time.ticks_diff(t_off, t_on),
            "channels": board.channels, "range": p["range"], "section": p["section"]}
