"""Tungsten against sources outside the project."""

import numpy as np
import pytest

from glowtrace.analysis.physics import tungsten as w


def test_ratio_at_1000_k_and_2000_k():
    # White & Minges, Int. J. Thermophys. 18 (1997) fit and Forsythe & Worthing,
    # Astrophys. J. 61 (1925) table, as the design brief quotes them: about
    # 4.4-4.6 x the 20 C value at 1000 K and 10-11 x at 2000 K
    assert 4.4 <= w.ratio(1000.0) <= 4.6
    assert 10.0 <= w.ratio(2000.0) <= 11.0


def test_forsythe_worthing_table_points():
    # Forsythe & Worthing (1925) resistivity, uOhm cm (typed from memory): the
    # table must reproduce its own rows and interpolate between them
    for t, rho in ((300, 5.65), (1000, 24.93), (1500, 40.36), (2000, 56.67), (3000, 92.04)):
        assert w.resistivity(t) == pytest.approx(rho, rel=1e-9)
    assert w.resistivity(1050) == pytest.approx(0.5 * (24.93 + 27.94))


def test_room_temperature_coefficient():
    # about 0.0045 per kelvin near room temperature (design brief; CRC
    # Handbook, from memory): a cold resistance read at 30 C is ~4.5 % high
    assert w.alpha_20() == pytest.approx(0.0045, rel=0.05)
    assert w.HeaterWire().to_20c(1.045, 30.0) == pytest.approx(1.0, abs=0.005)


def test_inverse():
    t = np.array([250.0, 293.15, 800.0, 1400.0, 2600.0])
    assert np.allclose(w.temperature(w.ratio(t)), t, atol=0.5)


def test_alloy_scaling():
    alloy = w.HeaterWire(k=0.8)
    assert alloy.ratio(w.T20_K) == pytest.approx(1.0)
    assert alloy.ratio(1400.0) - 1 == pytest.approx(0.8 * (w.ratio(1400.0) - 1))
    assert alloy.temperature(alloy.ratio(1400.0)) == pytest.approx(1400.0, abs=0.5)


def test_fast_ratio_matches():
    fast = w.FastRatio(w.HeaterWire(0.9))
    for t in (300.0, 777.7, 1234.5, 2222.2):
        assert fast(t) == pytest.approx(w.HeaterWire(0.9).ratio(t), rel=1e-9)
