"""Analytic start-up curves with exact answers, sampled like the tester does
(fast first, slower later), for tests of the analysis."""

import numpy as np

from glowtrace.analysis.curve import Curve


def sample_times(t_end: float = 30.0) -> np.ndarray:
    pre = np.arange(-0.032, 0.0, 0.001)
    parts = [np.arange(0, 0.02, 24e-6), np.arange(0.02, 0.5, 1e-4),
             np.arange(0.5, 5.0, 1e-3), np.arange(5.0, t_end, 1e-2)]
    on = np.concatenate(parts)
    return np.concatenate([pre, on[on <= t_end]])


def first_order(r_cold=6.0, r_hot=42.0, tau=1.5, volts=6.3, t_end=30.0, light_amp=None):
    """R(t) = r_hot - (r_hot - r_cold) exp(-t / tau) from a stiff supply."""
    t = sample_times(t_end)
    on = t >= 0
    r = np.where(on, r_hot - (r_hot - r_cold) * np.exp(-np.clip(t, 0, None) / tau), np.inf)
    v = np.full_like(t, volts)
    i = np.where(on, volts / r, 0.0)
    light = None
    if light_amp is not None:  # 1 + A exp(-t / 0.2 s): peak 1 + A, settles to 1
        light = np.where(on, 1.0 + light_amp * np.exp(-np.clip(t, 0, None) / 0.2), 0.0)
    return Curve(t, v, i, light)


def constant(r=42.0, volts=6.3, t_end=30.0):
    t = sample_times(t_end)
    return Curve(t, np.full_like(t, volts), np.where(t >= 0, volts / r, 0.0))


def heater(r20=6.2, f=0.0, ambient_c=22.0, seed=0, noise=0.002, warm_k=0.0, volts=6.3,
           t_end=40.0):
    """A heater's start-up from a stiff supply, made with the thermal model's
    own integrator (tau_w 0.5 s, tau_s 3.5 s, 150 K wire-to-sleeve drop),
    sampled like the tester, with relative noise on v and i."""
    from glowtrace.analysis.thermal import ThermalModel
    ta = ambient_c + 273.15
    m = ThermalModel(r20=r20, k=1.0, t_amb_k=ta, r_hot=r20 * 6.8, p_hot=volts ** 2 / (r20 * 6.8),
                     dt_ws=150.0, tau_w=0.5, tau_s=3.5, f=f, tau_x=0.12)
    tm, r, _, _ = m.in_circuit(volts, 0.0, t_end=t_end, n=1500,
                               t0_k=ta + warm_k if warm_k else None)
    t = sample_times(t_end)
    on = t >= 0
    rr = np.interp(t[on], tm, r)
    rng = np.random.default_rng(seed)
    i = np.zeros(len(t))
    v = np.full(len(t), volts)
    i[on] = volts / rr * (1 + noise * rng.standard_normal(on.sum()))
    v[on] = volts * (1 + noise * 0.3 * rng.standard_normal(on.sum()))
    return Curve(t, v, i)
