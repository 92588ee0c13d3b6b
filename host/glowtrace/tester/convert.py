"""Converter codes to amps and volts with the front-end numbers and the
calibration the capture was made with (both stored with it)."""

from dataclasses import dataclass

import numpy as np

from .calibration import gain_offset, nominal_scale
from .raw import RawCapture


@dataclass
class Curve:
    t_s: np.ndarray
    amps: dict          # section -> heater current, A
    volts: np.ndarray   # supply voltage at the socket, V
    light: np.ndarray | None


ZERO_GUARD_US = 500


def to_physical(raw: RawCapture) -> Curve:
    """Amps and volts with the calibration the capture was made with. The
    current channels' zero is their reading before switch-on (heater off)."""
    fe = raw.hello["frontend"]
    cal = raw.hello.get("calibration")
    t_us, sums, osm = raw.arrays()
    mean = sums / osm[:, None].astype(float)
    # the zero: the baseline before switch-on, not the sets taken around the
    # switching itself (the rp2 starts its converter before closing the gate)
    base = t_us < -ZERO_GUARD_US
    offsets = mean[base].mean(axis=0) if base.any() else np.zeros(mean.shape[1])
    rng = raw.params.get("range", "low")
    amps = {}
    volts = np.zeros(len(t_us))
    light = None
    for i, name in enumerate(raw.channels):
        gain, cal_offset = gain_offset(cal, name, rng)
        scale = nominal_scale(fe, name, rng) * gain
        if name in ("ia", "ib"):
            amps[name[1].upper()] = (mean[:, i] - offsets[i]) * scale
        elif name == "v":
            volts = (mean[:, i] - cal_offset) * scale
        elif name == "light":
            light = (mean[:, i] - offsets[i]) * scale
    return Curve(t_us / 1e6, amps, volts, light)


CHANNEL_NAMES = {"ia": "section A current", "ib": "section B current",
                 "v": "heater supply voltage", "light": "light (photodiode)"}


def clipped_channels(raw: RawCapture) -> dict:
    """Channels whose reading reached the top of the converter's range after
    switch-on: name -> (first time s, time spent there s). A clipped reading
    is a lower bound, not a measurement."""
    t_us, sums, osm = raw.arrays()
    if not len(t_us):
        return {}
    counts = 1 << raw.hello["frontend"]["adc"]["bits"]
    mean = sums / osm[:, None].astype(float)
    on = t_us >= 0
    dt = np.diff(t_us, append=t_us[-1]) / 1e6
    out = {}
    for k, name in enumerate(raw.channels):
        top = on & (mean[:, k] >= counts - 1.5)  # every conversion of the set at full scale
        if top.any():
            out[name] = (float(t_us[top][0]) / 1e6, float(dt[top].sum()))
    return out


def clipping_warnings(raw: RawCapture) -> list[str]:
    msgs = []
    for name, (first, spent) in clipped_channels(raw).items():
        what = CHANNEL_NAMES.get(name, name)
        spent_txt = f"{spent * 1000:.2g} ms" if spent < 1 else f"{spent:.2f} s"
        msg = (f"{what} reached the top of the converter's range for {spent_txt} "
               f"from {first:.3g} s: its readings there are lower bounds")
        if name == "light":
            msg += ", so light peak / settled reads low"
        elif name in ("ia", "ib"):
            msg += ", so the peak current reads low (use --range high)"
        msgs.append(msg)
    return msgs


KEY_FIGURES = ("cold_resistance_20c_ohm", "hot_current_a", "rated_hot_current_a",
               "rated_inrush_ratio", "warmup_90_s", "settle_1pct_s", "flash_index",
               "light_overshoot", "cold_start_ok", "heater_fault", "not_judged",
               "warnings")


def summary(raw: RawCapture) -> dict:
    """A short summary of a capture: raw facts, then the analysis's key
    figures per section when it has been analysed."""
    out = {"uuid": raw.uuid, "tube": raw.tube, "section": raw.section,
           "started_at": raw.started_at, "complete": raw.complete,
           "incomplete_reason": raw.incomplete_reason, "end_reason": raw.end_reason,
           "trip": raw.trip_cause, "sets": raw.n_sets,
           "ambient_c": raw.ambient_c}
    curve = to_physical(raw)
    on = curve.t_s >= 0
    if on.any():
        out["duration_s"] = round(float(curve.t_s[on][-1]), 3)
        for sec in raw.section:  # "A", "B" or both letters
            i = curve.amps.get(sec)
            if i is None:
                continue
            ion = i[on]
            tail = curve.t_s[on] >= curve.t_s[on][-1] - 1.0
            out[f"peak_a_{sec}"] = round(float(ion.max()), 4)
            # the current at the end means "hot" only if the capture ran its course
            ran = raw.end_reason in ("settled", "max_time")
            out[f"final_a_{sec}"] = round(float(ion[tail].mean()), 4) if ran else None
        out["supply_v"] = round(float(np.median(curve.volts[on])), 3)
        if curve.light is not None:
            # a raw fact for the eye, not the analysis: glow peak over settled glow
            lon = curve.light[on]
            settled = float(lon[curve.t_s[on] >= curve.t_s[on][-1] - 1.0].mean())
            out["glow_peak_over_settled"] = (round(float(lon.max()) / settled, 2)
                                             if settled > 0 else None)
    clipped = clipping_warnings(raw)
    if clipped:
        out["clipped_channels"] = sorted(clipped_channels(raw))
    if raw.analysis is not None:
        secs = raw.analysis.get("sections", {})
        out["analysis"] = {sec: {k: m.get(k) for k in KEY_FIGURES if k in m}
                           for sec, m in secs.items()}
        if raw.analysis.get("section_imbalance") is not None:
            out["section_imbalance"] = raw.analysis["section_imbalance"]
        if raw.analysis.get("warnings"):
            out["warnings"] = list(raw.analysis["warnings"])
    if clipped:
        out["warnings"] = out.get("warnings", []) + clipped
    return out
