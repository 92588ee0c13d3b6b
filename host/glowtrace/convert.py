"""Converter codes to amps and volts with the front-end numbers and the
calibration the capture was made with (both stored with it)."""

from dataclasses import dataclass

import numpy as np

from .calibration import gain_offset, nominal_scale
from .capture import RawCapture


@dataclass
class Curve:
    t_s: np.ndarray
    amps: dict          # section -> heater current, A
    volts: np.ndarray   # supply voltage at the socket, V
    light: np.ndarray | None


def to_physical(raw: RawCapture) -> Curve:
    """Amps and volts with the calibration the capture was made with. The
    current channels' zero is their reading before switch-on (heater off)."""
    fe = raw.hello["frontend"]
    cal = raw.hello.get("calibration")
    t_us, sums, osm = raw.arrays()
    mean = sums / osm[:, None].astype(float)
    base = t_us < 0
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


KEY_FIGURES = ("cold_resistance_20c_ohm", "hot_current_a", "inrush_ratio", "warmup_90_s",
               "settle_1pct_s", "flash_index", "light_overshoot", "cold_start_ok",
               "warnings")


def summary(raw: RawCapture) -> dict:
    """A short summary of a capture: raw facts, then the analysis's key
    figures per section when it has been analysed."""
    out = {"uuid": raw.uuid, "tube": raw.tube, "section": raw.section,
           "started_at": raw.started_at, "complete": raw.complete,
           "incomplete_reason": raw.incomplete_reason, "end_reason": raw.end_reason,
           "trip": raw.trip["cause"] if raw.trip else None, "sets": raw.n_sets,
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
    if raw.analysis is not None:
        secs = raw.analysis.get("sections", {})
        out["analysis"] = {sec: {k: m.get(k) for k in KEY_FIGURES if k in m}
                           for sec, m in secs.items()}
        if raw.analysis.get("section_imbalance") is not None:
            out["section_imbalance"] = raw.analysis["section_imbalance"]
        if raw.analysis.get("warnings"):
            out["warnings"] = raw.analysis["warnings"]
    return out
