"""Calibration of the tester: gain and offset per channel and current range,
with their uncertainty, from reference resistors and an open socket.

Model per channel: value = (code - offset_codes) x nominal scale x gain,
where the nominal scale comes from the front-end numbers. The voltage channel
is calibrated against the user's meter reading of the unloaded supply; each
current channel's low range against a reference resistor of known value and
tolerance, through which the current is V / (R_ref + R_path), R_path being the
shunt and switch resistance on the front-end numbers. The high range shares
the low range's shunt, so it is calibrated against the calibrated low range
on the same current (read low, high, low again: the mean of the two low
readings cancels the reference warming up). No low-ohm reference is needed,
whose socket contacts would spoil it.

Standard uncertainties (relative) combine root-sum-square: the reference's
tolerance and the meter's as rectangular limits (/ sqrt 3), the contact and
path resistance as +-10 milliohm rectangular, the scatter of the readings,
and for the high range the drift between the two low readings.
"""

import math
from contextlib import ExitStack, contextmanager
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone

from ..errors import GlowtraceError

U_PATH_OHM = 0.010  # contact and path resistance known to +- 10 milliohm
STEPS = ("open", "reference")


class CalibrationError(GlowtraceError):
    pass


@dataclass(frozen=True)
class Reference:
    ohms: float
    tolerance: float  # relative half-width, e.g. 0.01 for 1 %

    def __post_init__(self):
        if not (0.05 <= self.ohms <= 1000 and 0 < self.tolerance < 0.2):
            raise CalibrationError("a reference resistor needs 0.05..1000 ohm and a "
                                   "tolerance under 20 %")


def counts(fe: dict) -> float:
    return float(1 << fe["adc"]["bits"])


def nominal_scale(fe: dict, channel: str, range_name: str) -> float:
    """Physical units per code before calibration."""
    k = fe["adc"]["vref_v"] / counts(fe)
    if channel == "v":
        return k * fe["voltage_divider"]["volts_per_volt"]
    if channel in ("ia", "ib"):
        return k * fe["current_ranges"][range_name]["amps_per_volt"]
    return k


def gain_offset(cal: dict | None, channel: str, range_name: str) -> tuple[float, float]:
    """(gain, offset_codes) of a channel from a calibration record; the
    nominal record (or none) means (1, 0)."""
    if not cal or "channels" not in cal:
        return float((cal or {}).get("gain", 1.0)), float((cal or {}).get("offset_codes", 0.0))
    ch = cal["channels"].get(channel)
    if ch is None:
        return 1.0, 0.0
    if channel in ("ia", "ib"):
        ch = ch.get(range_name, {"gain": 1.0, "offset_codes": 0.0})
    return float(ch["gain"]), float(ch["offset_codes"])


def r_path(fe: dict, range_name: str) -> float:
    return fe["current_ranges"][range_name]["shunt_ohm"] + fe["switch"]["rds_on_ohm"]


def _rel_noise(m: dict, k: int, offset: float = 0.0) -> float:
    level = abs(m["means"][k] - offset)
    return (m["stds"][k] / math.sqrt(max(m["sets"], 1))) / level if level > 0 else 1.0


def solve(fe: dict, sections: tuple, supply_v: float, meter_tol: float, ref: Reference,
          readings: dict, board: str) -> dict:
    """The calibration from the readings: readings["open"][range] with both
    sections switched on and the socket empty; readings["reference"][s] a
    list of (range, measurement) with the reference in section s, in the
    order low, high, low."""
    chans = {}
    # voltage channel: the unloaded supply against the meter
    m0 = readings["open"]["low"]
    kv = m0["channels"].index("v")
    gain_v = supply_v / (m0["means"][kv] * nominal_scale(fe, "v", "low"))
    u_v = math.hypot(meter_tol / math.sqrt(3), _rel_noise(m0, kv))
    if not 0.8 < gain_v < 1.25:
        raise CalibrationError(f"the voltage reading is {100 * (1 / gain_v - 1):+.0f} % off "
                               "your meter: is the supply connected, and the meter reading "
                               "typed right?")
    chans["v"] = {"gain": gain_v, "offset_codes": 0.0, "u_gain": u_v}
    for s in sections:
        name = "i" + s.lower()
        chans[name] = {}
        offs = {rng: m["means"][m["channels"].index(name)] for rng, m in readings["open"].items()}
        series = readings["reference"][s]
        for rng, m in series:
            if m["tripped"]:
                raise CalibrationError(f"the {ref.ohms:g} ohm reference tripped the "
                                       f"over-current limit on the {rng} range: use a larger one")
        lows = [m for rng, m in series if rng == "low"]
        # low range: against the reference
        gains, us = [], []
        for m in lows:
            ki, kvv = m["channels"].index(name), m["channels"].index("v")
            v_node = m["means"][kvv] * nominal_scale(fe, "v", "low") * gain_v
            i_true = v_node / (ref.ohms + r_path(fe, "low"))
            i_nom = (m["means"][ki] - offs["low"]) * nominal_scale(fe, name, "low")
            if i_nom <= 0:
                raise CalibrationError(f"no current in section {s}: is the reference "
                                       f"fitted across section {s}?")
            gains.append(i_true / i_nom)
            us.append(math.sqrt((ref.tolerance / math.sqrt(3)) ** 2 + u_v ** 2
                                + (U_PATH_OHM / math.sqrt(3) / (ref.ohms + r_path(fe, "low"))) ** 2
                                + _rel_noise(m, ki, offs["low"]) ** 2 + _rel_noise(m, kvv) ** 2))
        gain = sum(gains) / len(gains)
        if not 0.8 < gain < 1.25:
            raise CalibrationError(
                f"section {s} reads {100 * (1 / gain - 1):+.0f} % off the {ref.ohms:g} ohm "
                f"reference: is it fitted across section {s}, and its value right?")
        u_low = max(us)
        chans[name]["low"] = {"gain": gain, "offset_codes": offs["low"], "u_gain": u_low}
        # high range: against the calibrated low range on the same current
        highs = [m for rng, m in series if rng == "high"]
        if highs and "high" in offs:
            ki = highs[0]["channels"].index(name)
            i_low = [(m["means"][ki] - offs["low"]) * nominal_scale(fe, name, "low") * gain
                     for m in lows]
            i_ref = sum(i_low) / len(i_low)
            drift = abs(i_low[-1] - i_low[0]) / 2 / i_ref if len(i_low) > 1 else 0.0
            i_nom = (highs[0]["means"][ki] - offs["high"]) * nominal_scale(fe, name, "high")
            g_hi = i_ref / i_nom
            if not 0.8 < g_hi < 1.25:
                raise CalibrationError(f"section {s}: the high range reads "
                                       f"{100 * (1 / g_hi - 1):+.0f} % off the low range: "
                                       "check the range select (GPIO13)")
            u_hi = math.sqrt(u_low ** 2 + drift ** 2 + _rel_noise(highs[0], ki, offs["high"]) ** 2)
            chans[name]["high"] = {"gain": g_hi, "offset_codes": offs["high"], "u_gain": u_hi}
    return {"source": "calibrated", "at": datetime.now(timezone.utc).isoformat(timespec="seconds"),
            "board": board, "supply_v": supply_v, "meter_tolerance": meter_tol,
            "reference": {"ohms": ref.ohms, "tolerance": ref.tolerance},
            "channels": chans}


@contextmanager
def fixture_testers(url_for_step, before_step=None):
    """A get_tester for run(): before_step(step) lets a person set the
    fixture up; the tester at url_for_step(step) is connected anew whenever
    that URL changes (a simulated socket), and kept otherwise."""
    from .driver import connect
    with ExitStack() as stack:
        current = {"url": None, "tester": None}

        def get_tester(step):
            if before_step:
                before_step(step)
            url = url_for_step(step)
            if url != current["url"]:
                stack.close()
                current["tester"] = stack.enter_context(connect(url))
                current["url"] = url
            return current["tester"]
        yield get_tester


def run(get_tester, supply_v: float, meter_tol: float, ref: Reference,
        ranges: tuple = ("low", "high")) -> dict:
    """Guide the steps, measure, solve, and write the result to the board.
    get_tester(step) returns the Tester to use for a step ('open',
    'reference') once the user has set the fixture up for it."""
    t = get_tester("open")
    fe = t.hello["frontend"]
    top = fe["limits"]["supply_v_max"]
    if supply_v > top:
        raise GlowtraceError(f"--supply-v {supply_v:g} V is above this tester's {top:g} V "
                             f"({fe.get('variant', '30V')} variant): lower the supply")
    dual = "ib" in t.hello["channels"]
    sections = ("A", "B") if dual else ("A",)
    both = "AB" if dual else "A"
    readings: dict = {"open": {rng: t.measure(both, rng, sets=200) for rng in ranges},
                      "reference": {}}
    t = get_tester("reference")
    order = ["low"] + (["high", "low"] if "high" in ranges else [])
    for s in sections:
        readings["reference"][s] = [(rng, t.measure(s, rng, sets=150, settle_ms=50))
                                    for rng in order]
    cal = solve(fe, sections, supply_v, meter_tol, ref, readings, t.hello["board"])
    t.set_calibration(cal)
    return cal


def age_warning(cal: dict | None, at: str, max_age_days: float) -> str | None:
    """A warning for a capture made with no calibration, or an old one."""
    if not cal or cal.get("source") != "calibrated":
        return "the tester was not calibrated: figures rest on nominal front-end numbers"
    try:
        made = datetime.fromisoformat(cal["at"])
        when = datetime.fromisoformat(at.replace("Z", "+00:00"))
    except (KeyError, ValueError):
        return "the tester's calibration has no date"
    if when - made > timedelta(days=max_age_days):
        return (f"the tester's calibration is {(when - made).days} days old (limit "
                f"{max_age_days:g}): calibrate again")
    return None
