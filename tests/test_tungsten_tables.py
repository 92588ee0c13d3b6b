"""The tungsten tables: Forsythe & Worthing (the table the project uses) and
White & Minges (1997) side by side, their spread carried as the uncertainty of
temperatures, and an even heater built on either table reading no flash."""

import sys
from pathlib import Path

import numpy as np
import pytest

from glowtrace import catalogue, paths
from glowtrace.analysis.analyze import analyze_curve
from glowtrace.analysis.curve import Curve
from glowtrace.analysis.physics import tungsten as w
from curves import sample_times

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "fixtures_hw"))
from heater_model import HeaterSection  # noqa: E402  (the simulator's heater, plain Python)
from tungsten import Tungsten  # noqa: E402


def test_white_minges_fit_and_the_table_agree_within_their_known_spread():
    # White & Minges' fit as quoted (uOhm cm): 24.49 at 1000 K, 57.40 at 2000 K
    assert w.resistivity_wm(1000.0) == pytest.approx(24.488, abs=0.01)
    assert w.resistivity_wm(2000.0) == pytest.approx(57.397, abs=0.01)
    # the design brief's ratios (W&M-derived): 4.4-4.6 at 1000 K, 10-11 at 2000 K
    assert 4.4 <= w.ratio_wm(1000.0) <= 4.65 and 10.0 <= w.ratio_wm(2000.0) <= 11.0
    grid = np.arange(400.0, 3000.0, 100.0)
    rel = w.resistivity_wm(grid) / w.resistivity(grid) - 1
    assert np.all(np.abs(rel) < 0.035)
    # CRC Handbook, pure metals, W at 293 K: 5.28 uOhm cm (from memory)
    assert w.resistivity_wm(293.15) == pytest.approx(5.28, rel=0.01)


def test_temperature_carries_the_spread_of_the_tables():
    for r in (4.5, 6.8, 10.3):
        t_table = float(w.temperature(r))
        rs = w.ratio_wm(np.linspace(300, 3600, 33001))
        t_wm = float(np.interp(r, rs, np.linspace(300, 3600, 33001)))
        assert w.temperature_spread(r) == pytest.approx(abs(t_table - t_wm), abs=0.5)
    assert 20 < w.temperature_spread(6.8) < 60  # at a cathode heater's ~1400 K


class WhiteMinges:
    """The simulator's tungsten interface on White & Minges' fit."""
    def __init__(self):
        self.grid = np.linspace(200.0, 3600.0, 6801)
        self.r = w.ratio_wm(self.grid)

    def ratio(self, t):
        return float(w.ratio_wm(t))

    def temperature(self, r):
        return float(np.interp(r, self.r, self.grid))


def even_heater_curve(tungsten, volts=6.3, ambient_c=22.0) -> Curve:
    """A 12AX7 section without any exposed share, switched on from a stiff
    supply, integrated with the simulator's own three-node model."""
    h = HeaterSection(tungsten, 6.3, 0.15, hot_cold_ratio=6.8, tau_wire_s=0.5,
                      tau_sleeve_s=3.5, ambient_c=ambient_c)
    t = sample_times(30.0)
    i = np.zeros(len(t))
    now = 0.0
    for k, tk in enumerate(t):
        if tk < 0:
            continue
        while now < tk:
            dt = min(tk - now, max(1e-5, 0.02 * now))
            h.step(volts / h.resistance(), dt)
            now += dt
        i[k] = volts / h.resistance()
    return Curve(t, np.where(t >= 0, volts, 0.0), i)


@pytest.mark.parametrize("table", ["forsythe-worthing", "white-minges"])
def test_an_even_heater_reads_no_flash_on_either_table(table):
    tungsten = (Tungsten(str(paths.TUNGSTEN_PATH)) if table == "forsythe-worthing"
                else WhiteMinges())
    c = even_heater_curve(tungsten)
    r = analyze_curve(c, 22.0, catalogue.load().get("12AX7"))
    assert r["flash_index"] == 0.0, r["warnings"]
