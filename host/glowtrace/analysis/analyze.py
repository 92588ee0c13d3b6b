"""One entry point for the analysis of a curve or a stored capture."""

import math

import numpy as np

from ..catalogue import TubeType
from .physics.tungsten import ZERO_C_K, HeaterWire
from . import ANALYSIS_VERSION, thermal
from .curve import Curve, from_capture
from .instrument import judge_instrument
from .metrics import SETTLE_BAND, TAIL_S, first_crossing, last_entry, measure

FLASH_TRY_RMS = 2.0      # fit the flash model when the even one misses by more
FLASH_MIN_GAIN = 25.0    # chi-square gain for the two extra parameters to count
# a share below this reads 0: it is within the noise of a good capture, and
# within what the two tungsten tables' different laws leave in an even fit
FLASH_MIN_SHARE = 0.01
POOR_FIT_RMS = 3.0
RATED_VOLTS = (0.5, 200.0)  # V: about 1 V battery filaments to 117 V (from memory)
RATED_AMPS = (0.005, 30.0)  # A: from battery filaments to big rectifiers
NORMALISE_LIMIT = 0.15   # heater voltage further than this from rated: not normalised


def _sig(x, digits=6):
    """Round to significant digits for output; leave non-floats alone."""
    if isinstance(x, (float, np.floating)):
        x = float(x)
        if not math.isfinite(x) or x == 0:
            return x if math.isfinite(x) else None
        return round(x, digits - 1 - int(math.floor(math.log10(abs(x)))))
    if isinstance(x, dict):
        return {k: _sig(v, digits) for k, v in x.items()}
    if isinstance(x, list):
        return [_sig(v, digits) for v in x]
    return x


def predict(model: thermal.ThermalModel, rated_v: float, rated_a: float,
            t_end: float | None = None) -> dict:
    """What the fitted heater does under standard conditions: at its rated
    voltage from a stiff supply (hot current, warm-up, settling), and in the
    series-string test circuit."""
    if t_end is None:  # long enough to settle: many sleeve time constants
        t_end = min(600.0, max(30.0, 25.0 * model.tau_s + 10.0 * model.tau_w))
    t, r, i, _ = model.in_circuit(rated_v, 0.0, t_end=t_end, n=300)
    warm90 = first_crossing(t, r, r[0] + 0.9 * (r[-1] - r[0]))
    hot = float(i[-1])
    settle = last_entry(t, i, hot, SETTLE_BAND * hot)
    # series-string test circuit: 4 x rated volts through 3 x rated V / rated A;
    # warm-up time = heater voltage reaching 80 % of rated
    t, _, _, vh = model.in_circuit(4 * rated_v, 3 * rated_v / rated_a, t_end=t_end, n=300)
    series = first_crossing(t, vh, 0.8 * rated_v)
    return {"rated_hot_current_a": hot, "rated_warmup_90_s": warm90,
            "rated_settle_1pct_s": settle, "series_warmup_s": series}


def current_sensitivity(wire: HeaterWire, hot_cold_ratio: float, ambient_c: float) -> float:
    """d ln I / d ln V of a heater in its hot state, for a heater that loses
    its power by radiation, P = K (T^4 - Ta^4), with the resistance of its
    tungsten (alloy) wire, R ~ a(T): with n = d ln P / d ln T and
    b = d ln R / d ln T, V^2 = P R gives s = (n - b) / (n + b). About 0.5 at a
    cathode heater's 1100-1400 K (b about 1.2, n about 4)."""
    t_hot = float(wire.temperature(hot_cold_ratio))
    ta = ambient_c + ZERO_C_K
    n = 4.0 * t_hot ** 4 / (t_hot ** 4 - ta ** 4)
    dt = 1.0
    b = (math.log(float(wire.ratio(t_hot + dt))) - math.log(float(wire.ratio(t_hot - dt)))) \
        / (math.log(t_hot + dt) - math.log(t_hot - dt))
    return (n - b) / (n + b)


def at_rated(out: dict, model, wire: HeaterWire, rated_v: float, rated_a: float,
             v_hot: float, ambient_c: float, warnings: list) -> None:
    """The tube's own figures at its rated voltage from a stiff supply, beside
    the measured ones: from the fitted model where there is one, else the hot
    current by the radiative sensitivity (current_sensitivity); the rated
    inrush ratio is the rated voltage over the cold resistance at 20 C, over
    that hot current. Not given when the test ran too far from rated."""
    keys = ("rated_hot_current_a", "rated_warmup_90_s", "rated_settle_1pct_s",
            "series_warmup_s", "rated_inrush_ratio")
    out.update(dict.fromkeys(keys), rated_basis=None)
    if not (rated_v and rated_a and out.get("hot_current_a") and v_hot > 0):
        return
    if abs(v_hot / rated_v - 1) > NORMALISE_LIMIT:
        warnings.append(f"the heater ran at {v_hot:.2f} V, too far from its rated {rated_v:g} V "
                        f"(more than {100 * NORMALISE_LIMIT:.0f} %) to give figures at rated "
                        "voltage: test it nearer its rating")
        return
    if model is not None:
        out.update(predict(model, rated_v, rated_a))
        out["rated_basis"] = "fitted model"
    else:
        s = current_sensitivity(wire, out["hot_cold_ratio"], ambient_c)
        out["rated_hot_current_a"] = out["hot_current_a"] * (rated_v / v_hot) ** s
        out["rated_basis"] = f"radiative sensitivity {s:.2f}"
    if out["rated_peak_current_a"] and out["rated_hot_current_a"]:
        out["rated_inrush_ratio"] = out["rated_peak_current_a"] / out["rated_hot_current_a"]


def analyze_curve(c: Curve, ambient_c: float, tube_type: TubeType | None = None,
                  rated_v: float | None = None, rated_a: float | None = None,
                  history_cold_r20: float | None = None, fit_model: bool = True) -> dict:
    if tube_type is not None:
        rating = tube_type.section_rating()
        rated_v, rated_a = rating.volts, rating.amps
    wire = HeaterWire(tube_type.tungsten_k if tube_type else 1.0)
    m = measure(c, ambient_c, wire, rated_v, rated_a, history_cold_r20)
    out = dict(m.values)
    out.update(flash_index=None, rated_peak_current_a=None)
    warnings = list(m.warnings)
    model = None
    if m.t is None:
        pass
    elif not fit_model:
        pass
    elif not out["cold_start_ok"] or out["warmup_90_s"] is None:
        warnings.append("thermal model not fitted: it needs a cold start with a resistance rise")
    elif m.t[-1] < 3 * TAIL_S:
        warnings.append("thermal model not fitted: the curve is too short")
    else:
        keep = np.isfinite(m.r)
        b = thermal.bin_curve(m.t[keep], m.i[keep], m.r[keep], n_bins=60)
        args = (b, out["cold_resistance_20c_ohm"], wire.k, ambient_c + ZERO_C_K,
                m.r_end, m.v_end)
        best = thermal.fit(*args, flash=False)
        out["flash_index"] = 0.0
        if best.rms > FLASH_TRY_RMS:
            fl = thermal.fit(*args, flash=True, start=best.model)
            if best.chi2 - fl.chi2 > FLASH_MIN_GAIN and fl.model.f >= FLASH_MIN_SHARE:
                best = fl
                out["flash_index"] = fl.model.f
        if best.rms > POOR_FIT_RMS:
            warnings.append(f"the thermal model misses this curve by {best.rms:.1f} x the "
                            "measurement noise: predictions are uncertain")
        model = best.model
        out["thermal_model"] = dict(model.as_dict(), fit_rms=best.rms, fit_evaluations=best.nfev)
        if tube_type is not None and tube_type.filament:
            out["flash_index"] = None  # a bare filament has no sleeve to lag behind
    if rated_v and out["cold_resistance_20c_ohm"]:
        out["rated_peak_current_a"] = rated_v / out["cold_resistance_20c_ohm"]
    if m.t is not None:
        at_rated(out, model, wire, rated_v, rated_a, m.v_end, ambient_c, warnings)
    if out.get("hot_cold_ratio") and out["hot_cold_ratio"] > 1:
        # the wire's mean temperature when hot, from its resistance ratio, and
        # the spread between the two tungsten tables as its uncertainty
        out["hot_wire_temperature_k"] = float(wire.temperature(out["hot_cold_ratio"]))
        out["hot_wire_temperature_u_k"] = wire.temperature_spread(out["hot_cold_ratio"])
    if c.light is not None:
        out["light_overshoot"] = light_overshoot(c)
    out["rated_volts"], out["rated_amps"] = rated_v, rated_a
    out["ambient_c"] = ambient_c
    out["warnings"] = warnings
    out["analysis_version"] = ANALYSIS_VERSION
    return _sig(out)


def light_overshoot(c: Curve) -> float | None:
    """Peak light over settled light (mean of the last second), both above
    the dark level before switch-on."""
    pre, on = c.t < 0, c.t >= 0
    dark = float(np.median(c.light[pre])) if pre.sum() >= 3 else 0.0
    t, lt = c.t[on], c.light[on] - dark
    settled = float(lt[t >= t[-1] - TAIL_S].mean())
    if settled <= 0:
        return None
    return float(lt.max()) / settled


# trips that say something about the heater (the others are the bench's:
# the host went silent, the firmware failed, the on-time ran out)
HEATER_TRIPS = ("open_heater", "over_current")


def judge_trip(raw, sections: dict) -> None:
    """A capture the tester stopped for an open or over-current heater: the
    section that tripped is a heater fault, and a section cut short with it is
    not judged (no figures, no warnings of its own), never called shorted.
    An over-current trip on the low range is the range's, not the tube's."""
    cause = raw.trip_cause
    if cause not in HEATER_TRIPS or not sections:
        return
    at_s = ((raw.trip or {}).get("at_us") or (raw.end or {}).get("off_us") or 0) / 1e6
    if cause == "open_heater":
        faulty = [s for s, m in sections.items()
                  if any("open heater" in w for w in m.get("warnings", []))]
        if not faulty:  # too few samples to see it: the section drawing least
            faulty = [min(sections, key=lambda s: sections[s].get("peak_current_a") or 0.0)]
        why = "open heater"
    else:
        peaks = {s: m.get("peak_current_a") or 0.0 for s, m in sections.items()}
        top = max(peaks.values())
        faulty = [s for s, p in peaks.items() if p >= 0.8 * top] if top > 0 else list(peaks)
        if raw.params.get("range", "low") == "low":
            for s in sections:
                sections[s] = not_judged(f"the low current range tripped at {at_s * 1000:.1f} "
                                         "ms: capture it on the high range (--range high)")
            return
        why = "shorted heater or wiring: over-current on the high range"
    for s in sections:
        if s in faulty:
            m = sections[s]
            w = [x for x in m.get("warnings", []) if "open heater" in x]
            if not w:
                w = [f"{why}: the tester switched off at {at_s * 1000:.1f} ms"]
            for k in list(m):
                if k not in ("analysis_version", "peak_current_a", "cold_resistance_ohm",
                             "cold_resistance_20c_ohm", "ambient_c"):
                    m[k] = None
            m.update(warnings=w, heater_fault=why, cold_start_ok=False,
                     analysis_version=ANALYSIS_VERSION)
        else:
            sections[s] = not_judged(f"cut short at {at_s * 1000:.1f} ms when section "
                                     f"{', '.join(faulty)} tripped ({why})")


def not_judged(why: str) -> dict:
    return {"not_judged": why, "warnings": [], "cold_start_ok": False,
            "analysis_version": ANALYSIS_VERSION}


def analyze_capture(raw, tube_type: TubeType | None = None,
                    history_cold_r20: dict | None = None) -> dict:
    """Every switched section of a tester capture, and their imbalance."""
    ambient = raw.ambient_c if raw.ambient_c is not None else 20.0
    curves = from_capture(raw)
    sections = {}
    for sec, c in curves.items():
        hist = (history_cold_r20 or {}).get(sec)
        try:
            sections[sec] = analyze_curve(c, ambient, tube_type, history_cold_r20=hist)
        except ValueError as e:
            sections[sec] = {"warnings": [f"not analysed: {e}"],
                             "analysis_version": ANALYSIS_VERSION}
    out = {"analysis_version": ANALYSIS_VERSION, "sections": sections,
           "section_imbalance": None}
    judge_trip(raw, sections)
    judge_instrument(raw, curves, sections)  # after the trip: a dead channel trips too
    if raw.ambient_c is None:
        out["warnings"] = ["no room temperature recorded: 20 C assumed"]
    a, b = sections.get("A", {}), sections.get("B", {})
    ra, rb = a.get("hot_resistance_ohm"), b.get("hot_resistance_ohm")
    if ra and rb:
        out["section_imbalance"] = _sig(abs(ra - rb) / (0.5 * (ra + rb)))
    return out


def analyze_file(path, ambient_c: float | None, type_name: str | None = None,
                 rated_v: float | None = None, rated_a: float | None = None,
                 fit_model: bool = True) -> tuple[Curve, dict]:
    """A CSV curve from any instrument (`glowtrace analyze`): the options
    checked, the file read, the curve measured. Returns (curve, result);
    result["warnings"] starts with what was noticed about the file."""
    from .. import catalogue
    from .csvio import read_curve
    from ..errors import GlowtraceError
    if (rated_v is None) != (rated_a is None):
        raise GlowtraceError("give both --rated-volts and --rated-amps, or --type")
    if type_name and rated_v is not None:
        raise GlowtraceError("give either --type or --rated-volts/--rated-amps, not both")
    for name, x, (lo, hi) in (("--rated-volts", rated_v, RATED_VOLTS),
                              ("--rated-amps", rated_a, RATED_AMPS)):
        if x is not None and not (math.isfinite(x) and lo <= x <= hi):
            raise GlowtraceError(f"{name} must be a heater rating between {lo:g} and {hi:g}")
    if ambient_c is not None and not (math.isfinite(ambient_c) and -40 <= ambient_c <= 80):
        raise GlowtraceError("--ambient-c must be a room temperature in C (-40..80)")
    tube_type = catalogue.load().get(type_name) if type_name else None
    curve, notes = read_curve(path)
    if ambient_c is None:
        ambient_c = 20.0
        notes.append("no --ambient-c given: 20 C assumed for the cold resistance")
    try:
        result = analyze_curve(curve, ambient_c, tube_type, rated_v, rated_a,
                               fit_model=fit_model)
    except (ValueError, ArithmeticError) as e:
        raise GlowtraceError(f"{path}: not analysed: {e}") from None
    result["warnings"] = notes + result["warnings"]
    if tube_type:
        result["type"] = tube_type.name
    return curve, result
