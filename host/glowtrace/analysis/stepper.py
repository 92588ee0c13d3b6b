"""The thermal model's integrator in compiled code (numba), and its exact
derivatives for the fit.

The model and its integration are described in thermal.py; this module holds
only the arithmetic of one step, written once for both real and complex
numbers:
  - real numbers integrate the model (the fit's residual, the predictions,
    the circuits room's simulations);
  - complex numbers give the fit its Jacobian by the complex step: with each
    fitted parameter moved by i*H (H = 1e-30), the imaginary part of the
    resistance over H is its derivative, exact to rounding (no difference of
    two nearly equal numbers, so no step size to tune), at the cost of one
    complex integration per parameter, all in one compiled call.

The constants of a model are passed as one array (PACK names the slots); the
tungsten ratio as its 10 K table (tungsten.FastRatio), looked up with the
real part of the temperature and applied linearly, so a complex temperature
carries its derivative through.

Without numba (it failed to install, or GLOWTRACE_NO_NUMBA=1 is set) the
same functions run as plain Python, about a hundred times slower;
tests/test_thermal.py checks both give the same figures."""

import os

import numpy as np

# slots of the constants array
PACK = ("g", "k_s", "c_w", "c_s", "k_x", "c_x", "ta4", "r20m", "r20x")
COMPLEX_STEP = 1e-30

try:
    if os.environ.get("GLOWTRACE_NO_NUMBA"):
        raise ImportError("turned off by GLOWTRACE_NO_NUMBA")
    from numba import njit
    COMPILED = True
except ImportError:  # pragma: no cover - the fallback is tested through py_func
    COMPILED = False

    def njit(*args, **kwargs):
        if args and callable(args[0]):
            return args[0]
        return lambda f: f


@njit(cache=True)
def row(t, n, t0, dt):
    """The table row of temperature t (real part), clamped to 0..n."""
    k = int((t.real - t0) / dt)
    if k < 0:
        return 0
    return n if k > n else k


@njit(cache=True)
def ratio(t, rt, st, t0, dt):
    """The tungsten ratio at t (real or complex) from its table."""
    k = row(t, len(rt) - 1, t0, dt)
    return rt[k] + (t - t0 - k * dt) * st[k]


@njit(cache=True)
def slope(t, st, t0, dt):
    return st[row(t, len(st) - 1, t0, dt)]


@njit(cache=True)
def phi(z):
    """(e^z - 1) / z, accurate near zero."""
    if abs(z) < 1e-6:
        return 1.0 + 0.5 * z
    return (np.exp(z) - 1.0) / z


@njit(cache=True)
def coupled(tw, ts, lw, ls, i2, h, c, rt, st, t0, dt):
    """Wire and sleeve over h seconds: the pair's equations linearised about
    (lw, ls) and solved exactly,
        x(h) = x0 + h * phi1(A h) (A x0 + c),
    with phi1(A h) for the 2x2 matrix from its two real eigenvalues (real
    because a12 * a21 > 0). Exact for the linearised system, also when Joule
    heating under a fixed current outgrows conduction (a positive
    eigenvalue), and accurate for steps far longer than the wire's time
    constant."""
    g, k_s, c_w, c_s, ta4, r20m = c[0], c[1], c[2], c[3], c[6], c[7]
    aw = ratio(lw, rt, st, t0, dt)
    sl = slope(lw, st, t0, dt)
    q = i2 * r20m
    ls3 = ls * ls * ls
    a11 = (q * sl - g) / c_w
    a12 = g / c_w
    a21 = g / c_s
    a22 = -(g + 4.0 * k_s * ls3) / c_s
    c1 = q * (aw - sl * lw) / c_w
    c2 = (-k_s * (ls3 * ls - ta4) + 4.0 * k_s * ls3 * ls) / c_s
    root = np.sqrt(0.25 * (a11 - a22) ** 2 + a12 * a21)
    l1 = 0.5 * (a11 + a22) + root
    l2 = l1 - 2.0 * root
    f1 = phi(l1 * h)
    f2 = phi(l2 * h)
    p0 = (l1 * f2 - l2 * f1) / (l1 - l2)
    p1 = (f1 - f2) / (l1 - l2)
    dw = a11 * tw + a12 * ts + c1
    ds = a21 * tw + a22 * ts + c2
    return (tw + h * (p0 * dw + p1 * (a11 * dw + a12 * ds)),
            ts + h * (p0 * ds + p1 * (a21 * dw + a22 * ds)))


@njit(cache=True)
def step(s, i2, h, c, rt, st, t0, dt):
    """One step of h seconds under a mean squared current i2; s = (wire,
    sleeve, exposed) temperatures, updated in place."""
    tw, ts, tx = s[0], s[1], s[2]
    fw, fs = coupled(tw, ts, tw, ts, i2, h, c, rt, st, t0, dt)
    # second pass linearised about the step's midpoint
    nw, ns = coupled(tw, ts, 0.5 * (tw + fw), 0.5 * (ts + fs), i2, h, c, rt, st, t0, dt)
    r20x = c[8]
    if r20x.real != 0.0:
        k_x, c_x, ta4 = c[4], c[5], c[6]
        q = i2 * r20x
        lx = tx
        nx = tx
        for _ in range(2):  # exposed share: the same two passes, one node
            lx3 = lx * lx * lx
            lin = (4.0 * k_x * lx3 - q * slope(lx, st, t0, dt)) / c_x
            rate = (q * ratio(lx, rt, st, t0, dt) - k_x * (lx3 * lx - ta4)) / c_x \
                - lin * (tx - lx)
            nx = tx + h * phi(-lin * h) * rate
            lx = 0.5 * (tx + nx)
        s[2] = nx
    s[0] = nw
    s[1] = ns


@njit(cache=True)
def resistance(s, c, rt, st, t0, dt):
    r = c[7] * ratio(s[0], rt, st, t0, dt)
    if c[8].real != 0.0:
        r += c[8] * ratio(s[2], rt, st, t0, dt)
    return r


@njit(cache=True)
def under_current(edges, i2, c, rt, st, t0, dt, start_k):
    """Mean resistance over each interval edges[k]..edges[k+1] when the mean
    squared current i2[k] flows, from start_k kelvin."""
    s = c[:3].copy()
    s[:] = start_k
    out = np.empty(len(i2), dtype=c.dtype)
    r_prev = resistance(s, c, rt, st, t0, dt)
    for k in range(len(i2)):
        step(s, i2[k], edges[k + 1] - edges[k], c, rt, st, t0, dt)
        r = resistance(s, c, rt, st, t0, dt)
        out[k] = 0.5 * (r_prev + r)
        r_prev = r
    return out


@njit(cache=True)
def under_current_jacobian(edges, i2, cs, rt, st, t0, dt, start_k):
    """d(mean resistance)/d(parameter) per interval: row j of cs holds the
    complex constants with parameter j moved by i * COMPLEX_STEP."""
    out = np.empty((len(i2), cs.shape[0]))
    for j in range(cs.shape[0]):
        r = under_current(edges, i2, cs[j], rt, st, t0, dt, start_k)
        for k in range(len(i2)):
            out[k, j] = r[k].imag / COMPLEX_STEP
    return out


@njit(cache=True)
def in_circuit(t, v_supply, r_series, c, rt, st, t0, dt, start_k):
    """Heater resistance at the times t behind a supply and a series
    resistance: per step a trial with the current at the start, then the
    real step with the current at the mean of the start and trial
    resistances."""
    s = c[:3].copy()
    s[:] = start_k
    r = np.empty(len(t))
    r[0] = resistance(s, c, rt, st, t0, dt)
    saved = s.copy()
    for k in range(1, len(t)):
        h = t[k] - t[k - 1]
        saved[:] = s
        r0 = resistance(s, c, rt, st, t0, dt)
        i0 = v_supply / (r_series + r0)
        step(s, i0 * i0, h, c, rt, st, t0, dt)
        i_mid = v_supply / (r_series + 0.5 * (r0 + resistance(s, c, rt, st, t0, dt)))
        s[:] = saved
        step(s, i_mid * i_mid, h, c, rt, st, t0, dt)
        r[k] = resistance(s, c, rt, st, t0, dt)
    return r


KERNELS = ("row", "ratio", "slope", "phi", "coupled", "step", "resistance", "under_current",
           "under_current_jacobian", "in_circuit")
