"""A physically based thermal model of a heater section, fitted to a measured
start-up curve, and simulated in other circuits.

Nodes (the same structure as the simulated tester's heater, which is what a
heater is: a wire in a sleeve, perhaps with a share outside it):
  wire    heat capacity C_w, conducts G * (T_w - T_s) to the sleeve
  sleeve  heat capacity C_s, radiates K_s * (T_s^4 - T_a^4) to the room
  exposed share f of the cold resistance, heat capacity C_x, radiates
          K_x * (T_x^4 - T_a^4) itself (the part that flashes); absent when f=0
Resistance: R = R20 * ((1 - f) * a(T_w) + f * a(T_x)), a() the type's
tungsten ratio (physics.tungsten.HeaterWire).

The fit drives the model with the *measured current* and compares the
resistance it predicts with the measured R = V / I. The supply does not enter,
so a sagging supply or a series resistor in the test does not bias the fit.
The model is anchored on its settled state (R_hot, P_hot), which fixes G, K_s
and K_x. R_hot is fitted too (a capture ends when the current is settled to
a fraction of a percent, not at the final value), with P_hot = V_end^2 / R_hot
for the heater voltage at the end of the curve; the other fitted parameters
are time constants, the wire-to-sleeve temperature drop and (flash model) f.

Integration: exponential Euler per node on a log-spaced grid; each node's
update is exact for its linearised equation, so large late steps are stable.
"""

import math
from dataclasses import asdict, dataclass

import numpy as np
from scipy.optimize import least_squares

from .physics.tungsten import HeaterWire, fast_ratio


@dataclass
class ThermalModel:
    r20: float          # cold resistance at 20 C, ohm
    k: float            # tungsten alloy factor of the type
    t_amb_k: float      # room temperature, K
    r_hot: float        # settled resistance the model is anchored on, ohm
    p_hot: float        # settled power, W
    dt_ws: float        # wire minus sleeve temperature when settled, K
    tau_w: float        # wire time constant C_w / G, s
    tau_s: float        # sleeve time constant C_s / (4 K_s T_s^3), s
    f: float = 0.0      # share of the cold resistance outside the sleeve
    tau_x: float = 0.1  # exposed share's time constant, s

    # derived constants ---------------------------------------------------
    def constants(self):
        a = fast_ratio(self.k)
        wire = HeaterWire(self.k)
        t_hot = float(wire.temperature(self.r_hot / self.r20))
        ta = self.t_amb_k
        t_s = max(t_hot - self.dt_ws, ta + 20.0)
        p_w = (1.0 - self.f) * self.p_hot
        g = p_w / (t_hot - t_s)
        k_s = p_w / (t_s ** 4 - ta ** 4)
        c_w = self.tau_w * g
        c_s = self.tau_s * 4.0 * k_s * t_s ** 3
        if self.f > 0:
            k_x = self.f * self.p_hot / (t_hot ** 4 - ta ** 4)
            c_x = self.tau_x * 4.0 * k_x * t_hot ** 3
        else:
            k_x, c_x = 0.0, 1.0
        return a, g, k_s, c_w, c_s, k_x, c_x, t_hot

    def as_dict(self) -> dict:
        d = asdict(self)
        d["model"] = "wire-sleeve-exposed/1"
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "ThermalModel":
        return cls(**{k: v for k, v in d.items() if k in cls.__dataclass_fields__})

    # simulation --------------------------------------------------------
    def _stepper(self, t0_k: float | None = None):
        a, g, k_s, c_w, c_s, k_x, c_x, _ = self.constants()
        ta4 = self.t_amb_k ** 4
        r20m = self.r20 * (1.0 - self.f)
        r20x = self.r20 * self.f
        start = self.t_amb_k if t0_k is None else t0_k
        state = [start, start, start]
        exp, sqrt = math.exp, math.sqrt

        def resistance():
            r = r20m * a(state[0])
            if r20x:
                r += r20x * a(state[2])
            return r

        def phi(z):
            """(e^z - 1) / z, accurate near zero."""
            return 1.0 + 0.5 * z if abs(z) < 1e-6 else (exp(z) - 1.0) / z

        def coupled(tw, ts, lw, ls, i2, h):
            """Wire and sleeve over h seconds: the pair's equations
            linearised about (lw, ls) and solved exactly,
                x(h) = x0 + h * phi1(A h) (A x0 + c),
            with phi1(A h) for the 2x2 matrix from its two real eigenvalues
            (real because a12 * a21 > 0). Exact for the linearised system,
            also when Joule heating under a fixed current outgrows
            conduction (a positive eigenvalue), and accurate for steps far
            longer than the wire's time constant."""
            aw, slope = a(lw), a.slope_at(lw)
            q = i2 * r20m
            ls3 = ls * ls * ls
            a11 = (q * slope - g) / c_w
            a12 = g / c_w
            a21 = g / c_s
            a22 = -(g + 4.0 * k_s * ls3) / c_s
            c1 = q * (aw - slope * lw) / c_w
            c2 = (-k_s * (ls3 * ls - ta4) + 4.0 * k_s * ls3 * ls) / c_s
            root = sqrt(0.25 * (a11 - a22) ** 2 + a12 * a21)
            l1 = 0.5 * (a11 + a22) + root
            l2 = l1 - 2.0 * root
            f1, f2 = phi(l1 * h), phi(l2 * h)
            p0 = (l1 * f2 - l2 * f1) / (l1 - l2)
            p1 = (f1 - f2) / (l1 - l2)
            dw = a11 * tw + a12 * ts + c1
            ds = a21 * tw + a22 * ts + c2
            return (tw + h * (p0 * dw + p1 * (a11 * dw + a12 * ds)),
                    ts + h * (p0 * ds + p1 * (a21 * dw + a22 * ds)))

        def step(i2, h):
            tw, ts, tx = state
            first = coupled(tw, ts, tw, ts, i2, h)
            # second pass linearised about the step's midpoint
            nw, ns = coupled(tw, ts, 0.5 * (tw + first[0]), 0.5 * (ts + first[1]), i2, h)
            if r20x:
                lx = tx
                q = i2 * r20x
                for _ in range(2):  # exposed share: the same two passes, one node
                    lx3 = lx * lx * lx
                    lin = (4.0 * k_x * lx3 - q * a.slope_at(lx)) / c_x
                    rate = (q * a(lx) - k_x * (lx3 * lx - ta4)) / c_x - lin * (tx - lx)
                    nx = tx + h * phi(-lin * h) * rate
                    lx = 0.5 * (tx + nx)
                tx = nx
            state[0], state[1], state[2] = nw, ns, tx
        return step, resistance, state

    def resistance_under_current(self, edges: np.ndarray, i2: np.ndarray,
                                 t0_k: float | None = None) -> np.ndarray:
        """Mean resistance over each interval edges[k]..edges[k+1] when the
        measured mean squared current i2[k] flows."""
        step, resistance, _ = self._stepper(t0_k)
        out = np.empty(len(i2))
        r_prev = resistance()
        h = np.diff(edges)
        for k in range(len(i2)):
            step(float(i2[k]), float(h[k]))
            r = resistance()
            out[k] = 0.5 * (r_prev + r)
            r_prev = r
        return out

    def in_circuit(self, v_supply: float, r_series: float, t_end: float = 120.0,
                   n: int = 400, t_first: float = 1e-5, t0_k: float | None = None):
        """Switch on behind a supply of v_supply volts and a series resistance,
        from cold (or from t0_k kelvin). Returns (t, heater resistance,
        current, heater voltage)."""
        step, resistance, state = self._stepper(t0_k)
        t = np.concatenate([[0.0], np.geomspace(t_first, t_end, n)])
        r = np.empty(len(t))
        r[0] = resistance()
        for k in range(1, len(t)):
            h = t[k] - t[k - 1]
            # trial step with the current at the start, then the real one with
            # the current at the mean of the start and trial resistances
            saved = list(state)
            r0 = resistance()
            i0 = v_supply / (r_series + r0)
            step(i0 * i0, h)
            i_mid = v_supply / (r_series + 0.5 * (r0 + resistance()))
            state[:] = saved
            step(i_mid * i_mid, h)
            r[k] = resistance()
        i = v_supply / (r_series + r)
        return t, r, i, i * r


# fitting ------------------------------------------------------------------
@dataclass
class Binned:
    edges: np.ndarray   # interval edges, s (edges[0] = 0, switch-on)
    i2: np.ndarray      # mean squared current per interval
    r: np.ndarray       # mean measured resistance per interval
    sigma: np.ndarray   # standard error of r per interval


def bin_curve(t: np.ndarray, i: np.ndarray, r: np.ndarray, n_bins: int = 120,
              min_count: int = 4) -> Binned:
    """Log-spaced intervals from switch-on to the end of the curve, merged
    until each holds min_count samples; standard error from the spread."""
    t_first = max(float(t[t > 0][0]) if np.any(t > 0) else 1e-5, 1e-6)
    raw_edges = np.concatenate([[0.0], np.geomspace(t_first, float(t[-1]) * 1.000001, n_bins)])
    idx = np.searchsorted(raw_edges, t, side="right") - 1
    counts = np.bincount(idx, minlength=len(raw_edges))
    edges, start, acc = [0.0], 0, 0
    keep = []
    for b in range(len(raw_edges) - 1):
        acc += counts[b]
        if acc >= min_count:
            edges.append(raw_edges[b + 1])
            keep.append((start, b))
            start, acc = b + 1, 0
    if acc and keep:  # fold a short tail into the last interval
        edges[-1] = raw_edges[-1]
        keep[-1] = (keep[-1][0], len(raw_edges) - 2)
    edges = np.array(edges)
    which = np.searchsorted(edges, t, side="right") - 1
    which = np.clip(which, 0, len(edges) - 2)
    nb = len(edges) - 1
    # time-weighted means: the sampling rate changes between phases, and an
    # interval's mean must be its time average, as the model's is
    mid = np.concatenate([[t[0]], 0.5 * (t[1:] + t[:-1]), [t[-1]]])
    w = np.diff(mid)
    w = np.where(w > 0, w, 1e-9)
    wsum = np.bincount(which, w, nb)
    wsum[wsum == 0] = 1e-12
    mean_r = np.bincount(which, w * r, nb) / wsum
    mean_i2 = np.bincount(which, w * i * i, nb) / wsum
    n = np.maximum(np.bincount(which, minlength=nb), 1).astype(float)
    var = np.bincount(which, w * r * r, nb) / wsum - mean_r ** 2
    sigma = np.sqrt(np.maximum(var, 0.0) / n)
    floor = 2e-4 * np.abs(mean_r)  # quantisation and model detail
    return Binned(edges, mean_i2, mean_r, np.sqrt(sigma ** 2 + floor ** 2))


@dataclass
class Fit:
    model: ThermalModel
    chi2: float
    n_points: int
    n_params: int
    nfev: int

    @property
    def rms(self) -> float:
        """Root-mean-square residual in units of the measurement noise."""
        return math.sqrt(self.chi2 / self.n_points)


def fit(b: Binned, r20: float, k: float, t_amb_k: float, r_end: float, v_end: float,
        flash: bool, start: ThermalModel | None = None) -> Fit:
    """Least-squares fit (log parameters, bounded) of the model to binned
    resistance. r_end, v_end: resistance and heater voltage at the end."""
    names = ["r_hot", "dt_ws", "tau_w", "tau_s"] + (["f", "tau_x"] if flash else [])
    lo = {"r_hot": 0.98 * r_end, "dt_ws": 20.0, "tau_w": 0.005, "tau_s": 0.1, "f": 1e-4,
          "tau_x": 0.005}
    hi = {"r_hot": 1.25 * r_end, "dt_ws": 600.0, "tau_w": 20.0, "tau_s": 200.0, "f": 0.5,
          "tau_x": 3.0}
    guess = {"r_hot": r_end, "dt_ws": 150.0, "tau_w": 0.5, "tau_s": 3.0, "f": 0.05,
             "tau_x": 0.1}
    if start is not None:
        guess.update({n: getattr(start, n) for n in ("r_hot", "dt_ws", "tau_w", "tau_s")})
    t0_k = None

    def make(x):
        p = dict(zip(names, np.exp(x)))
        return ThermalModel(r20=r20, k=k, t_amb_k=t_amb_k, p_hot=v_end ** 2 / p["r_hot"], **p)

    def residual(x):
        m = make(x)
        return (m.resistance_under_current(b.edges, b.i2, t0_k) - b.r) / b.sigma

    x0 = np.log([min(max(guess[n], lo[n] * 1.01), hi[n] * 0.99) for n in names])
    res = least_squares(residual, x0, bounds=(np.log([lo[n] for n in names]),
                                              np.log([hi[n] for n in names])),
                        x_scale=1.0, xtol=1e-4, ftol=1e-6, max_nfev=400)
    return Fit(make(res.x), float(np.sum(res.fun ** 2)), len(b.r), len(names), res.nfev)
