"""Model-free figures on analytic curves with exact answers (no simulator)."""

import math

import numpy as np
import pytest

from glowtrace.analysis.analyze import analyze_curve, predict
from glowtrace.analysis.curve import Curve
from glowtrace.analysis.physics import tungsten
from curves import constant, first_order


def test_constant_resistance():
    m = analyze_curve(constant(r=42.0), ambient_c=20.0, rated_v=6.3, rated_a=0.15)
    assert m["peak_current_a"] == pytest.approx(0.15)
    assert m["cold_resistance_ohm"] == pytest.approx(42.0)
    assert m["hot_resistance_ohm"] == pytest.approx(42.0)
    assert m["inrush_ratio"] == pytest.approx(1.0)
    assert m["hot_power_w"] == pytest.approx(6.3 * 0.15)
    assert m["settle_1pct_s"] == pytest.approx(0.0)
    assert m["warmup_50_s"] is None and m["warmup_90_s"] is None
    assert m["cold_start_ok"] is False
    assert any("no resistance rise" in w for w in m["warnings"])


def test_first_order_rise_exact_times():
    tau, rc, rh = 1.5, 6.0, 42.0
    # (not a thermal heater's curve: model-free figures only)
    m = analyze_curve(first_order(rc, rh, tau), ambient_c=20.0, fit_model=False)
    # IEEE 181 reference levels on a first-order rise: t_p = tau ln(1 / (1 - p))
    assert m["warmup_50_s"] == pytest.approx(tau * math.log(2), rel=0.005)
    assert m["warmup_90_s"] == pytest.approx(tau * math.log(10), rel=0.005)
    # current within 1 % of V/R_hot once (R_hot - R) <= R_hot (1 - 1/1.01)
    t_settle = tau * math.log((rh - rc) / (rh * (1 - 1 / 1.01)))
    assert m["settle_1pct_s"] == pytest.approx(t_settle, rel=0.01)
    assert m["peak_current_a"] == pytest.approx(6.3 / rc, rel=1e-5)
    assert m["cold_resistance_ohm"] == pytest.approx(rc, rel=1e-4)
    assert m["hot_resistance_ohm"] == pytest.approx(rh, rel=1e-4)
    assert m["inrush_ratio"] == pytest.approx(rh / rc, rel=1e-4)
    assert m["cold_start_ok"] is True and m["warnings"] == []


def test_cold_resistance_corrected_to_20c():
    # design brief: a cold resistance read at 30 C is about 4.5 % above 20 C
    m = analyze_curve(first_order(6.0, 42.0), ambient_c=30.0, fit_model=False)
    expect = 6.0 / tungsten.ratio(303.15)
    assert m["cold_resistance_20c_ohm"] == pytest.approx(expect, rel=1e-5)
    assert 6.0 / m["cold_resistance_20c_ohm"] == pytest.approx(1.045, abs=0.005)
    assert m["hot_cold_ratio"] == pytest.approx(42.0 / expect, rel=1e-5)


def test_known_light_overshoot():
    m = analyze_curve(first_order(light_amp=5.0), ambient_c=20.0, fit_model=False)
    assert m["light_overshoot"] == pytest.approx(6.0, rel=1e-5)


def test_warm_start_is_flagged():
    m = analyze_curve(first_order(r_cold=36.0, r_hot=42.0), ambient_c=20.0)
    assert m["cold_start_ok"] is False
    assert any("not a cold start" in w for w in m["warnings"])
    assert m["flash_index"] is None  # no model without a cold start


def test_history_flags_a_warm_tube():
    # a tube whose cold resistance is 12 % above its own earlier cold starts
    m = analyze_curve(first_order(r_cold=6.72), ambient_c=20.0, fit_model=False,
                      history_cold_r20=6.0)
    assert m["cold_start_ok"] is False
    assert any("earlier cold starts" in w for w in m["warnings"])
    m = analyze_curve(first_order(r_cold=6.1), ambient_c=20.0, fit_model=False,
                      history_cold_r20=6.0)
    assert m["cold_start_ok"] is True


def test_rating_checks():
    m = analyze_curve(first_order(volts=5.0), ambient_c=20.0, rated_v=6.3, rated_a=0.15,
                      fit_model=False)
    assert any("far from its rated" in w for w in m["warnings"])
    assert m["rated_peak_current_a"] == pytest.approx(6.3 / m["cold_resistance_20c_ohm"],
                                                  rel=1e-5)


def test_noisy_curve_keeps_its_times():
    rng = np.random.default_rng(7)
    c = first_order()
    noisy = Curve(c.t, c.v * (1 + 0.003 * rng.standard_normal(len(c.t))),
                  c.i * (1 + 0.01 * rng.standard_normal(len(c.t))))
    m = analyze_curve(noisy, ambient_c=20.0, fit_model=False)
    assert m["warmup_90_s"] == pytest.approx(1.5 * math.log(10), rel=0.02)
    assert m["cold_resistance_ohm"] == pytest.approx(6.0, rel=0.01)


class PrescribedHeater:
    """A heater whose resistance follows R(t) whatever drives it: not
    physical, but it gives the series warm-up definition a closed form."""

    def __init__(self, r_cold, r_hot, tau):
        self.rc, self.rh, self.tau = r_cold, r_hot, tau

    def in_circuit(self, v_supply, r_series, t_end=120.0, n=400):
        t = np.concatenate([[0.0], np.geomspace(1e-5, t_end, 20000)])
        r = self.rh - (self.rh - self.rc) * np.exp(-t / self.tau)
        i = v_supply / (r_series + r)
        return t, r, i, i * r


def test_series_warmup_definition_closed_form():
    # tube data's standard circuit: supply 4 x rated V, series resistance
    # 3 x rated V / rated A, time for the heater voltage to reach 80 % of rated.
    # With R_hot = rated V / rated A, V_h = 4 V R / (R + 3 R_hot) = 0.8 V at
    # R = 0.75 R_hot: t = tau ln((R_hot - R_cold) / (0.25 R_hot))
    v, a, rc, tau = 6.3, 0.3, 3.0, 2.0
    rh = v / a
    p = predict(PrescribedHeater(rc, rh, tau), v, a, t_end=120.0)
    assert p["series_warmup_s"] == pytest.approx(tau * math.log((rh - rc) / (0.25 * rh)),
                                                 rel=1e-3)
    assert p["rated_warmup_90_s"] == pytest.approx(tau * math.log(10), rel=1e-3)
    # a heater already at its hot resistance reaches 80 % at once
    assert predict(PrescribedHeater(rh, rh, tau), v, a, 120.0)["series_warmup_s"] == 0.0
