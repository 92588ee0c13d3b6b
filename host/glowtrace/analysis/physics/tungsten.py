"""Tungsten resistivity against temperature, its inverse, and the per-type
alloy scaling of the resistance ratio.

Data: Forsythe & Worthing (1925) as tabulated in the CRC Handbook, in
data/tungsten_resistivity.csv (values typed from memory; see that file and
tests/test_physics.py for the checks). Ratios are taken against 20 C
(293.15 K), the reference temperature of cold-resistance figures.

Heater wire is often a tungsten-rhenium alloy whose resistance rises less
with temperature than pure tungsten's. We model a type's ratio as
    R(T) / R(20 C) = 1 + k * (ratio_W(T) - 1)
with k = 1 for pure tungsten and k < 1 for an alloy; k is a property of the
type (catalogue), not of a single tube.

White & Minges (1997), Int. J. Thermophys. 18, is the usual modern reference;
its fourth-order fit (rho in uOhm cm, 300-3695 K) is quoted second-hand in
public code, and is here as resistivity_wm() beside the table. The two differ
by 1.5-3.5 % in the ratio against 20 C over heater temperatures, which is a
systematic uncertainty of tens of kelvin on any temperature told from a
resistance ratio (temperature_spread()). Room-temperature check, from memory of
the CRC Handbook's "Electrical resistivity of pure metals": 5.28 uOhm cm at
293 K, nearer White & Minges (5.31) than this table (5.48)."""

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from ... import paths

T20_K = 293.15
ZERO_C_K = 273.15


@lru_cache(maxsize=1)
def table() -> tuple[np.ndarray, np.ndarray]:
    """(temperature K, resistivity uOhm cm) from the data file."""
    rows = []
    with open(paths.TUNGSTEN_PATH) as f:
        for line in f:
            line = line.strip()
            if line and not line.startswith("#") and not line[0].isalpha():
                rows.append([float(x) for x in line.split(",")])
    arr = np.array(rows)
    return arr[:, 0], arr[:, 1]


def resistivity(t_k):
    """Resistivity in uOhm cm; linear between table rows, extrapolated
    linearly from the end segments outside 300-3000 K."""
    ts, rho = table()
    t = np.asarray(t_k, dtype=float)
    out = np.interp(t, ts, rho)
    lo = t < ts[0]
    hi = t > ts[-1]
    if np.any(lo) or np.any(hi):
        s0 = (rho[1] - rho[0]) / (ts[1] - ts[0])
        s1 = (rho[-1] - rho[-2]) / (ts[-1] - ts[-2])
        out = np.where(lo, rho[0] + (t - ts[0]) * s0, out)
        out = np.where(hi, rho[-1] + (t - ts[-1]) * s1, out)
    return out if out.ndim else float(out)


def ratio(t_k):
    """Resistance at t_k over resistance at 20 C, pure tungsten."""
    return resistivity(t_k) / resistivity(T20_K)


@lru_cache(maxsize=2)
def _inverse_grid(table_ratio=None) -> tuple[np.ndarray, np.ndarray]:
    """(ratios, temperatures) on a 1 K grid, for inverting a ratio law
    (default: this table's)."""
    grid = np.linspace(150.0, 3600.0, 3451)
    return (table_ratio or ratio)(grid), grid


def temperature(r):
    """Inverse of ratio(): temperature in K for a resistance ratio."""
    rs, grid = _inverse_grid()
    return np.interp(np.asarray(r, dtype=float), rs, grid)


# White & Minges (1997) fourth-order fit, uOhm cm, valid 300-3695 K
WM_COEFFS = (-0.9680, 1.9274e-2, 7.8260e-6, -1.8517e-9, 2.0790e-13)


def resistivity_wm(t_k):
    """White & Minges' fit (see the module doc); below 300 K, extended on
    its slope at 300 K."""
    t = np.asarray(t_k, dtype=float)
    c0, c1, c2, c3, c4 = WM_COEFFS
    tt = np.maximum(t, 300.0)
    rho = c0 + tt * (c1 + tt * (c2 + tt * (c3 + tt * c4)))
    slope = c1 + 2 * c2 * 300.0 + 3 * c3 * 300.0 ** 2 + 4 * c4 * 300.0 ** 3
    out = np.where(t < 300.0, rho - (300.0 - t) * slope, rho)
    return out if out.ndim else float(out)


def ratio_wm(t_k):
    return resistivity_wm(t_k) / resistivity_wm(T20_K)


def temperature_spread(r) -> float:
    """|T from the table - T from White & Minges| for a pure-tungsten
    resistance ratio r against 20 C: the systematic uncertainty, K."""
    rs, grid = _inverse_grid(ratio_wm)
    return float(abs(temperature(r) - np.interp(r, rs, grid)))


def alpha_20() -> float:
    """Temperature coefficient of resistance at 20 C, per kelvin."""
    return float((ratio(T20_K + 0.5) - ratio(T20_K - 0.5)))


@dataclass(frozen=True)
class HeaterWire:
    """A type's resistance ratio: pure tungsten scaled by k (see module doc)."""
    k: float = 1.0

    def ratio(self, t_k):
        return 1.0 + self.k * (ratio(t_k) - 1.0)

    def temperature(self, r):
        return temperature(1.0 + (np.asarray(r, dtype=float) - 1.0) / self.k)

    def temperature_spread(self, r) -> float:
        """The systematic uncertainty of temperature(r), K (the two tables)."""
        return temperature_spread(1.0 + (float(r) - 1.0) / self.k)

    def to_20c(self, resistance: float, ambient_c: float) -> float:
        """A resistance measured at room temperature, corrected to 20 C."""
        return resistance / float(self.ratio(ambient_c + ZERO_C_K))


class FastRatio:
    """ratio(T) for scalar use in tight loops (the thermal model): the same
    piecewise-linear table, precomputed on a 10 K grid; as Python lists for
    scalar calls, as arrays (table, slopes) for the compiled stepper."""

    def __init__(self, wire: HeaterWire, t0: float = 150.0, t1: float = 3600.0,
                 step: float = 10.0):
        self.t0, self.step = t0, step
        grid = np.arange(t0, t1 + step, step)
        r = wire.ratio(grid)
        self.r = [float(x) for x in r]
        self.slope = [float(x) for x in np.diff(r) / step] + [float((r[-1] - r[-2]) / step)]
        self.n = len(self.r) - 1
        self.table, self.slopes = np.array(self.r), np.array(self.slope)

    def slope_at(self, t: float) -> float:
        i = int((t - self.t0) / self.step)
        return self.slope[0 if i < 0 else (self.n if i > self.n else i)]

    def __call__(self, t: float) -> float:
        x = (t - self.t0) / self.step
        i = int(x)
        if i < 0:
            i = 0
        elif i > self.n:
            i = self.n
        return self.r[i] + (t - self.t0 - i * self.step) * self.slope[i]


@lru_cache(maxsize=16)
def fast_ratio(k: float) -> FastRatio:
    """The FastRatio of an alloy factor, built once: the thermal fit asks for
    it at every evaluation of its model."""
    return FastRatio(HeaterWire(k))
