"""Faults of the tester itself, told apart from faults of the tube: a
converter channel that reads one code from start to end (a broken amplifier
or wire reads no noise at all, where a live 12-bit channel always shows some),
and a voltage channel that reads nothing while the heater draws current (no
heater conducts without a voltage across it). A section measured through such
a channel is not judged: the tube is not blamed for the instrument."""

import numpy as np

from . import ANALYSIS_VERSION
from ..tester.convert import CHANNEL_NAMES

MIN_SETS = 10          # fewer sets than this say nothing about a channel
V_MIN_WITH_CURRENT = 0.5   # V: the bench supply is 2-30 V (schematics/)
I_FLOWING_A = 0.005        # the analysis' own floor for "current after switch-on"

SELFTEST_HINT = ("the tester's fault, not the tube's (`glowtrace selftest` with a dummy "
                 "load finds the channel)")


def dead_channels(raw) -> list[str]:
    """Channels whose every reading in the capture is the same code."""
    _, sums, _ = raw.arrays()
    if len(sums) < MIN_SETS:
        return []
    return [name for k, name in enumerate(raw.channels) if np.ptp(sums[:, k]) == 0]


def tester_faults(raw, curves: dict) -> dict:
    """section -> why its figures cannot be trusted, for faults of the tester."""
    out = {}
    dead = set(dead_channels(raw))
    for sec, c in curves.items():
        ch = "i" + sec.lower()
        if ch in dead:
            out[sec] = (f"the {CHANNEL_NAMES[ch]} channel reads one code throughout, not "
                        "even noise (a broken amplifier or wire, or an open heater on an "
                        f"amplifier that sits at its rail): {SELFTEST_HINT}")
            continue
        on = c.t >= 0
        if on.sum() < MIN_SETS:
            continue
        amps = float(np.median(c.i[on]))
        volts = float(np.median(c.v[on]))
        if "v" in dead or (amps > I_FLOWING_A and volts < V_MIN_WITH_CURRENT):
            out[sec] = (f"the {CHANNEL_NAMES['v']} channel reads {volts:.2f} V while the "
                        f"heater draws {amps:.3f} A: {SELFTEST_HINT}")
    return out


def judge_instrument(raw, curves: dict, sections: dict) -> None:
    """Replace the figures of every section measured through a faulty
    channel with the reason, whatever the firmware's trip said."""
    for sec, why in tester_faults(raw, curves).items():
        sections[sec] = {"not_judged": why, "tester_fault": True, "warnings": [],
                         "cold_start_ok": False, "analysis_version": ANALYSIS_VERSION}
