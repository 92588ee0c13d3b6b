"""The simulated tester's heater against sources outside the project.

The model runs under MicroPython in the simulator; its modules are plain
Python, so these checks import them directly."""

import sys

import numpy as np
import pytest

from glowtrace import paths
from glowtrace.tester.convert import to_physical
from simhelp import sim_tester

sys.path.insert(0, str(paths.FIXTURES_DIR))
from heater_model import HeaterSection  # noqa: E402
from tungsten import Tungsten  # noqa: E402

W = Tungsten(str(paths.TUNGSTEN_PATH))


def test_tungsten_ratio_at_1000_and_2000_k():
    # Design brief, section 3, after White & Minges (1997) and Forsythe &
    # Worthing (1925): about 4.4-4.6 x the 20 C value at 1000 K, 10-11 x at 2000 K
    assert 4.4 <= W.ratio(1000) <= 4.6
    assert 10.0 <= W.ratio(2000) <= 11.0


def test_tungsten_room_temperature_coefficient():
    # about 0.0045 per kelvin near room temperature (CRC Handbook, from memory)
    alpha = (W.ratio(303.15) - W.ratio(283.15)) / 20.0
    assert alpha == pytest.approx(0.0045, rel=0.08)


def test_tungsten_inverse_is_consistent():
    for t in (350.0, 900.0, 1400.0, 2500.0):
        assert W.temperature(W.ratio(t)) == pytest.approx(t, abs=0.5)


def _settle(h, volts, seconds=60.0, dt=0.002):
    for _ in range(int(seconds / dt)):
        h.step(volts / h.resistance(), dt)
    return volts / h.resistance()


@pytest.mark.parametrize("ratio,flash", [(6.8, 0.0), (7.5, 0.0), (6.5, 0.15)])
def test_model_settles_at_its_rating(ratio, flash):
    h = HeaterSection(W, 6.3, 0.3, hot_cold_ratio=ratio, flash_share=flash, ambient_c=20.0)
    h.extra_ohm = 0.0
    cold = h.resistance()
    assert cold == pytest.approx(21.0 / ratio, rel=1e-6)  # R_hot / ratio at 20 C
    assert _settle(h, 6.3) == pytest.approx(0.3, rel=0.003)


def test_exposed_share_overshoots_its_hot_temperature():
    # with a stiff supply the exposed share takes the high inrush current
    # before the sleeve warms: it overshoots (design brief, section 3)
    h = HeaterSection(W, 6.3, 0.15, flash_share=0.12, ambient_c=20.0)
    h.extra_ohm = 0.0
    peak = 0.0
    for _ in range(3000):
        h.step(6.3 / h.resistance(), 0.001)
        peak = max(peak, h.tx)
    assert peak > h.t_hot + 50
    # ... and a start with the current limited to its rating does not
    h.reset()
    peak_limited = 0.0
    for _ in range(20000):
        h.step(min(6.3 / h.resistance(), 0.15), 0.001)
        peak_limited = max(peak_limited, h.tx)
    assert peak_limited < h.t_hot + 5


@pytest.mark.parametrize("tube", ["12AX7", "6V6", "EL34", "5U4GB"])
def test_inrush_within_reported_range(tube):
    # reported inrush of real tubes: 2.7 to 7.2 x rated current
    # (audioXpress, Sept. 2004, cited in the design brief)
    rng = "high" if tube in ("EL34", "5U4GB") else "low"
    with sim_tester(tube=tube, seed=2) as t:
        raw = t.capture("T", "A", {"range": rng, "max_s": 60})
    c = to_physical(raw)
    i = c.amps["A"][c.t_s >= 0]
    ratio = i.max() / i[-50:].mean()
    assert 2.7 <= ratio <= 7.2, ratio


def test_flashing_section_shows_light_overshoot_and_fast_rise():
    with sim_tester(flash_b=0.15, light=1, seed=4) as t:
        even = t.capture("T", "A", {"max_s": 30})
        flash = t.capture("T", "B", {"max_s": 30})
    ce, cf = to_physical(even), to_physical(flash)
    for c, sec in ((ce, "A"), (cf, "B")):
        on = c.t_s >= 0
        c.r = c.volts[on] / c.amps[sec][on]
        c.ton = c.t_s[on]
        c.lon = c.light[on]
    # light: the flashing section's glow peaks above its settled level
    assert cf.lon.max() > 1.3 * cf.lon[-50:].mean()
    assert ce.lon.max() < 1.05 * ce.lon[-50:].mean()
    # resistance at 0.3 s as a share of the way from cold to hot: the exposed
    # share heats early, so the flashing section is further along
    def share(c):
        r0, rh = c.r[:5].mean(), c.r[-50:].mean()
        return (np.interp(0.3, c.ton, c.r) - r0) / (rh - r0)
    assert share(cf) > share(ce) + 0.05


def test_simulator_presets_agree_with_the_catalogue():
    """A preset's heater is its catalogue type's: rating per section, one
    heater or two, filament or cathode."""
    from glowtrace import catalogue
    from glowtrace.tester.sim import tube_presets
    cat = catalogue.load()
    for name, p in tube_presets().items():
        t = cat.get(name)
        rating = t.section_rating()
        assert (p["section_v"], p["section_a"]) == (rating.volts, rating.amps), name
        assert p["dual"] == bool(t.centre_tapped), name
        assert p.get("filament", False) == bool(t.filament), name
