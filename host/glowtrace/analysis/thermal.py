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

from . import stepper
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
        """(ratio table, G, K_s, C_w, C_s, K_x, C_x, T_hot) of this model."""
        c = derived(self.r20, self.k, self.t_amb_k, self.r_hot, self.p_hot, self.dt_ws,
                    self.tau_w, self.tau_s, self.f, self.tau_x)
        return (fast_ratio(self.k),) + tuple(float(x.real) for x in c[:6]) \
            + (float(hot_temperature(self.r_hot / self.r20, self.k).real),)

    def packed(self) -> np.ndarray:
        """The constants as the compiled stepper takes them (stepper.PACK)."""
        return np.array([x.real for x in derived(
            self.r20, self.k, self.t_amb_k, self.r_hot, self.p_hot, self.dt_ws,
            self.tau_w, self.tau_s, self.f, self.tau_x)])

    def as_dict(self) -> dict:
        d = asdict(self)
        d["model"] = "wire-sleeve-exposed/1"
        return d

    @classmethod
    def from_dict(cls, d: dict) -> "ThermalModel":
        return cls(**{k: v for k, v in d.items() if k in cls.__dataclass_fields__})

    # simulation --------------------------------------------------------
    def _table(self):
        a = fast_ratio(self.k)
        return a.table, a.slopes, a.t0, a.step

    def _stepper(self, t0_k: float | None = None):
        """(step(i2, h), resistance(), state) for a caller that drives the
        model step by step (the circuits room); state is the (wire, sleeve,
        exposed) temperatures, which the caller may save and restore."""
        c = self.packed()
        tab = self._table()
        state = np.full(3, self.t_amb_k if t0_k is None else t0_k)
        step_fn, resist = stepper.step, stepper.resistance

        def step(i2, h):
            step_fn(state, i2, h, c, *tab)

        def resistance():
            return resist(state, c, *tab)
        return step, resistance, state

    def resistance_under_current(self, edges: np.ndarray, i2: np.ndarray,
                                 t0_k: float | None = None) -> np.ndarray:
        """Mean resistance over each interval edges[k]..edges[k+1] when the
        measured mean squared current i2[k] flows."""
        return stepper.under_current(np.asarray(edges, float), np.asarray(i2, float),
                                     self.packed(), *self._table(),
                                     self.t_amb_k if t0_k is None else t0_k)

    def in_circuit(self, v_supply: float, r_series: float, t_end: float = 120.0,
                   n: int = 400, t_first: float = 1e-5, t0_k: float | None = None):
        """Switch on behind a supply of v_supply volts and a series resistance,
        from cold (or from t0_k kelvin). Returns (t, heater resistance,
        current, heater voltage)."""
        t = np.concatenate([[0.0], np.geomspace(t_first, t_end, n)])
        r = stepper.in_circuit(t, float(v_supply), float(r_series), self.packed(),
                               *self._table(), self.t_amb_k if t0_k is None else t0_k)
        i = v_supply / (r_series + r)
        return t, r, i, i * r


def hot_temperature(ratio, k: float):
    """The wire temperature of a resistance ratio against 20 C (real or
    complex: a complex ratio carries its derivative, the inverse of the
    table's slope there)."""
    t = float(HeaterWire(k).temperature(ratio.real))
    if isinstance(ratio, complex) and ratio.imag:
        t += 1j * ratio.imag / fast_ratio(k).slope_at(t)
    return t


def derived(r20, k, t_amb_k, r_hot, p_hot, dt_ws, tau_w, tau_s, f, tau_x):
    """The model's constants in the stepper's order (stepper.PACK), from its
    parameters; real or complex (the complex step of the fit's Jacobian)."""
    t_hot = hot_temperature(r_hot / r20, k)
    ta = t_amb_k
    t_s = t_hot - dt_ws
    if t_s.real < ta + 20.0:
        t_s = ta + 20.0 + 0.0 * t_s
    p_w = (1.0 - f) * p_hot
    g = p_w / (t_hot - t_s)
    k_s = p_w / (t_s ** 4 - ta ** 4)
    c_w = tau_w * g
    c_s = tau_s * 4.0 * k_s * t_s ** 3
    if f.real > 0:
        k_x = f * p_hot / (t_hot ** 4 - ta ** 4)
        c_x = tau_x * 4.0 * k_x * t_hot ** 3
    else:
        k_x, c_x = 0.0 * f, 1.0 + 0.0 * f
    return [g, k_s, c_w, c_s, k_x, c_x, ta ** 4 + 0.0 * f, r20 * (1.0 - f), r20 * f]


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

    def make(x):
        p = dict(zip(names, np.exp(x)))
        return ThermalModel(r20=r20, k=k, t_amb_k=t_amb_k, p_hot=v_end ** 2 / p["r_hot"], **p)

    tab = fast_ratio(k)
    tab = (tab.table, tab.slopes, tab.t0, tab.step)
    edges, i2 = np.asarray(b.edges, float), np.asarray(b.i2, float)

    def residual(x):
        return (stepper.under_current(edges, i2, make(x).packed(), *tab, t_amb_k) - b.r) \
            / b.sigma

    def jacobian(x):
        """Exact derivatives by the complex step (stepper's module doc)."""
        rows = []
        for j in range(len(x)):
            p = dict(zip(names, np.exp(x.astype(complex))))
            p[names[j]] = p[names[j]] * np.exp(1j * stepper.COMPLEX_STEP)
            p = {n: complex(v) for n, v in p.items()}
            p.setdefault("f", ThermalModel.f)  # the even model's
            p.setdefault("tau_x", ThermalModel.tau_x)
            rows.append(derived(r20, k, t_amb_k, p_hot=v_end ** 2 / p["r_hot"], **p))
        d = stepper.under_current_jacobian(edges, i2, np.array(rows, complex), *tab, t_amb_k)
        return d / b.sigma[:, None]

    x0 = np.log([min(max(guess[n], lo[n] * 1.01), hi[n] * 0.99) for n in names])
    res = least_squares(residual, x0, jac=jacobian,
                        bounds=(np.log([lo[n] for n in names]), np.log([hi[n] for n in names])),
                        x_scale=1.0, xtol=1e-4, ftol=1e-6, max_nfev=400)
    return Fit(make(res.x), float(np.sum(res.fun ** 2)), len(b.r), len(names),
               res.nfev + len(names) * res.njev)
