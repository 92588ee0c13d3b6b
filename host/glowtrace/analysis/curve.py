"""A start-up curve as the analysis sees it: time, heater voltage, heater
current (and light), whatever instrument it came from."""

from dataclasses import dataclass

import numpy as np

from ..tester.raw import RawCapture
from ..tester.convert import to_physical


@dataclass
class Curve:
    t: np.ndarray                  # s from switch-on; negative before it
    v: np.ndarray                  # volts across the heater section
    i: np.ndarray                  # amps through it
    light: np.ndarray | None = None
    clip_a: float | None = None    # current at which the converter clips
    label: str = ""

    def __post_init__(self):
        self.t = np.asarray(self.t, dtype=float)
        self.v = np.asarray(self.v, dtype=float)
        self.i = np.asarray(self.i, dtype=float)
        if self.light is not None:
            self.light = np.asarray(self.light, dtype=float)


def from_capture(raw: RawCapture) -> dict:
    """One Curve per switched section of a tester capture. The voltage
    channel reads the socket's supply side; the section's own voltage is that
    less the drop across its shunt and switch (front-end numbers)."""
    c = to_physical(raw)
    fe = raw.hello["frontend"]
    rng = raw.params.get("range", "low")
    r_path = fe["current_ranges"][rng]["shunt_ohm"] + fe["switch"]["rds_on_ohm"]
    counts = 1 << fe["adc"]["bits"]
    clip = (counts - 1) / counts * fe["adc"]["vref_v"] * fe["current_ranges"][rng]["amps_per_volt"]
    out = {}
    for sec in raw.section:
        if sec not in c.amps:  # its channel unknown (the start record lost)
            continue
        i = c.amps[sec]
        out[sec] = Curve(c.t_s, c.volts - i * r_path, i, c.light, clip_a=0.98 * clip,
                         label=f"{raw.tube} {sec}")
    return out


def stored_curves(store, uuid: str) -> dict:
    """Curves per section of any stored capture, tester's or imported."""
    if store.capture_source(uuid) == "import":
        from ..logbook import floatrows
        row, cols = store.load_imported(uuid, floatrows.MAX_POINTS)
        return {row["section"]: Curve(cols["time_s"], cols["volts"], cols["amps"],
                                      cols.get("light"), label=f"{row['tube']} {row['section']}")}
    raw = store.load_capture(uuid)
    return from_capture(raw) if raw.blocks else {}
