"""One or more heaters, each its own fitted thermal model, switched on in a
circuit: a supply (optionally ramped from zero, linearly), its source
resistance (supply, leads and switch), and a series resistor that a switch
shorts after a delay (a preheat resistor with its bypass relay, or a
dropping resistor never bypassed). The heaters are in parallel on the
supply's node (an amplifier's heater winding) or in series (a string).

The integration is the analysis's own (`ThermalModel._stepper`: exact for
each node's linearised equations), driven by the current the circuit gives:
each step is taken twice, first with the currents at its start, then with
those at the mean of the start and trial resistances, as the analysis's
`in_circuit` does for one heater behind a resistor."""

from dataclasses import dataclass, field

import math

import numpy as np

from ..analysis.thermal import ThermalModel
from ..errors import GlowtraceError

ROOM_K = 293.15  # the analysis' rated figures are for a cold start at 20 C


class CircuitError(GlowtraceError):
    """A circuit that cannot be built or simulated as given."""


@dataclass
class Heater:
    name: str
    model: ThermalModel
    rated_v: float | None = None
    rated_a: float | None = None


@dataclass
class Ntc:
    """An NTC inrush limiter from its data sheet: resistance at 25 C, its B
    value, R(T) = R25 exp(B (1/T - 1/298.15)); its dissipation constant
    (W/K: the power that holds it 1 K above the room) and thermal time
    constant (s): a single heat capacity delta * tau losing delta * (T - Ta)."""
    r25: float
    beta: float
    dissipation_w_per_k: float
    tau_s: float

    def resistance(self, t_k: float) -> float:
        return self.r25 * math.exp(self.beta * (1.0 / t_k - 1.0 / 298.15))

    def step(self, t_k: float, power: float, h: float, room_k: float) -> float:
        """Its temperature after h seconds at this power (exact for a
        constant power)."""
        final = room_k + power / self.dissipation_w_per_k
        return final + (t_k - final) * math.exp(-h / self.tau_s)


@dataclass
class Mosfet:
    """An N-MOSFET source follower whose gate charges through gate_ohm into
    gate_f from drive_v: the heaters see at most the gate voltage less the
    threshold (the data sheet's V_GS(th); its spread is run as two designs),
    and when it is fully on, its R_DS(on) in series."""
    gate_ohm: float
    gate_f: float
    drive_v: float | None  # None: 10 V above the supply (softstart.study fills it in)
    vth: float
    rds_on: float = 0.02

    def limit_v(self, t: float) -> float:
        vg = self.drive_v * (1.0 - math.exp(-t / (self.gate_ohm * self.gate_f)))
        return max(0.0, vg - self.vth)


@dataclass
class Circuit:
    supply_v: float
    source_ohm: float = 0.0
    series_ohm: float = 0.0          # preheat or dropping resistor
    bypass_s: float | None = None    # when a switch shorts it; None: never
    ramp_s: float = 0.0              # the supply rises linearly over this time
    series: bool = False             # heaters in series (a string), else parallel
    ntc: Ntc | None = None           # an inrush limiter in series
    mosfet: Mosfet | None = None     # a gate-ramped source follower

    def check(self) -> None:
        for name, x in (("supply volts", self.supply_v), ("source ohms", self.source_ohm),
                        ("series ohms", self.series_ohm), ("ramp time", self.ramp_s)):
            if not np.isfinite(x) or x < 0:
                raise CircuitError(f"{name} must be a finite number, not negative ({x:g})")
        if self.supply_v <= 0:
            raise CircuitError("the supply must be above 0 V")
        if self.bypass_s is not None and not (np.isfinite(self.bypass_s)
                                               and self.bypass_s > 0):
            raise CircuitError("the bypass time must be a positive number of seconds")
        for part, what in ((self.ntc, "NTC"), (self.mosfet, "MOSFET")):
            if part is not None and not all(np.isfinite(x) and x > 0 for x in vars(part).values()
                                            if not isinstance(x, bool)):
                raise CircuitError(f"every {what} value must be a positive number")

    def source_v(self, t: float) -> float:
        """The supply's own voltage, ramped."""
        if self.ramp_s > 0 and t < self.ramp_s:
            return self.supply_v * t / self.ramp_s
        return self.supply_v

    def supply_at(self, t: float) -> float:
        """What drives the heaters: the supply, no more than a follower's
        gate lets through."""
        v = self.source_v(t)
        return v if self.mosfet is None else min(v, self.mosfet.limit_v(t))

    def resistor_in(self, t: float) -> float:
        """The series resistor's ohms at time t (0 once bypassed)."""
        if self.bypass_s is not None and t >= self.bypass_s:
            return 0.0
        return self.series_ohm


@dataclass
class Run:
    """What happened, on a common time grid (t[0] = 0, switch-on)."""
    t: np.ndarray
    current: np.ndarray             # supply current, A
    heater_i: np.ndarray            # [heaters, t], A
    heater_v: np.ndarray            # [heaters, t], V
    heater_r: np.ndarray            # [heaters, t], ohm
    exposed_k: np.ndarray           # [heaters, t], temperature of the exposed share, K
    wire_k: np.ndarray              # [heaters, t], wire (in the sleeve), K
    sleeve_k: np.ndarray            # [heaters, t], sleeve, K
    resistor_w: np.ndarray          # power in the series resistor, W
    source_w: np.ndarray            # power in the source resistance, W
    supply_w: np.ndarray            # power the supply delivers, W
    names: list = field(default_factory=list)
    ntc_w: np.ndarray | None = None     # power in the NTC, W
    ntc_k: np.ndarray | None = None     # its temperature, K
    mosfet_w: np.ndarray | None = None  # power in the MOSFET, W


def time_grid(c: Circuit, t_end: float, n: int = 300, t_first: float = 1e-5) -> np.ndarray:
    """Log-spaced from switch-on, with the same again after the bypass (the
    second inrush starts there) and evenly through a ramp."""
    parts = [np.zeros(1), np.geomspace(t_first, t_end, n)]
    if c.bypass_s is not None and c.bypass_s < t_end:
        parts.append(c.bypass_s + np.geomspace(t_first, t_end - c.bypass_s, n // 3))
        parts.append([c.bypass_s])
    if 0 < c.ramp_s < t_end:
        parts.append(np.linspace(0, c.ramp_s, 60))
    if c.mosfet is not None:  # the gate's rise, evenly over five time constants
        tau = c.mosfet.gate_ohm * c.mosfet.gate_f
        parts.append(np.linspace(0, min(5 * tau, t_end), 80))
    t = np.unique(np.concatenate(parts))
    return t[t <= t_end]


def _currents(c: Circuit, t: float, r: list[float],
              r_ntc: float = 0.0) -> tuple[float, list[float], float]:
    """(supply current, heater currents, node voltage) at time t for heater
    resistances r (and the NTC's, when there is one)."""
    v = c.supply_at(t)
    r_ext = c.source_ohm + c.resistor_in(t) + r_ntc
    if c.mosfet is not None:
        r_ext += c.mosfet.rds_on
    if c.series:
        i = v / (r_ext + sum(r))
        return i, [i] * len(r), i * sum(r)
    g = sum(1.0 / x for x in r)
    node = v / (1.0 + r_ext * g)
    return node * g, [node / x for x in r], node


def simulate(c: Circuit, heaters: list[Heater], t_end: float = 60.0, n: int = 300,
             from_k: float | None = ROOM_K) -> Run:
    """Switch the heaters on in circuit c, from cold (from_k kelvin; None:
    each model's own room temperature). An NTC starts at 20 C too."""
    c.check()
    if not heaters:
        raise CircuitError("no heater to switch on")
    steppers = [h.model._stepper(from_k) for h in heaters]
    room = from_k or heaters[0].model.t_amb_k
    t = time_grid(c, t_end, n)
    m, k_n = len(heaters), len(t)
    hr, hx = np.empty((m, k_n)), np.empty((m, k_n))
    hw, hs = np.empty((m, k_n)), np.empty((m, k_n))
    ntc_k = np.full(k_n, room)
    for j, (_, resistance, state) in enumerate(steppers):
        hr[j, 0], (hw[j, 0], hs[j, 0], hx[j, 0]) = resistance(), state

    def r_ntc(tk):
        return c.ntc.resistance(tk) if c.ntc is not None else 0.0

    for k in range(1, k_n):
        h, mid = t[k] - t[k - 1], 0.5 * (t[k - 1] + t[k])
        r0 = [float(x) for x in hr[:, k - 1]]
        saved = [list(s[2]) for s in steppers]
        n0 = ntc_k[k - 1]
        total, i0, _ = _currents(c, mid, r0, r_ntc(n0))
        for (step, _, _), i in zip(steppers, i0):
            step(i * i, h)
        n1 = c.ntc.step(n0, total * total * r_ntc(n0), h, room) if c.ntc else n0
        r_mid = [0.5 * (a + s[1]()) for a, s in zip(r0, steppers)]
        total, i_mid, _ = _currents(c, mid, r_mid, 0.5 * (r_ntc(n0) + r_ntc(n1)))
        for (step, resistance, state), old, i, j in zip(steppers, saved, i_mid, range(m)):
            state[:] = old
            step(i * i, h)
            hr[j, k], (hw[j, k], hs[j, k], hx[j, k]) = resistance(), state
        if c.ntc is not None:
            ntc_k[k] = c.ntc.step(n0, total * total * 0.5 * (r_ntc(n0) + r_ntc(n1)), h, room)
    # the currents and powers at each grid point, from the resistances there
    # (just after a bypass or the end of a ramp, its new state)
    cur = np.empty(k_n)
    hi, hv = np.empty((m, k_n)), np.empty((m, k_n))
    res_w, src_w, sup_w = np.empty(k_n), np.empty(k_n), np.empty(k_n)
    ntc_w, fet_w = np.zeros(k_n), np.zeros(k_n)
    for k in range(k_n):
        rn = r_ntc(ntc_k[k])
        total, ii, _ = _currents(c, t[k], list(hr[:, k]), rn)
        cur[k] = total
        hi[:, k] = ii
        hv[:, k] = np.array(ii) * hr[:, k]
        res_w[k] = total * total * c.resistor_in(t[k])
        src_w[k] = total * total * c.source_ohm
        ntc_w[k] = total * total * rn
        if c.mosfet is not None:  # the drop from the supply to what it lets through
            fet_w[k] = (total * (c.source_v(t[k]) - c.supply_at(t[k]))
                        + total * total * c.mosfet.rds_on)
        sup_w[k] = total * c.source_v(t[k])
    return Run(t, cur, hi, hv, hr, hx, hw, hs, res_w, src_w, sup_w, [h.name for h in heaters],
               ntc_w if c.ntc else None, ntc_k if c.ntc else None,
               fet_w if c.mosfet else None)


def energy(t: np.ndarray, power: np.ndarray) -> float:
    """Trapezoidal integral of a power over time, J."""
    return float(np.sum(0.5 * (power[1:] + power[:-1]) * np.diff(t)))


def warmup_90(t: np.ndarray, r: np.ndarray) -> float | None:
    """First time a heater's resistance reaches 90 % of the way from its
    initial to its final value (the analysis' warm-up reference level)."""
    level = r[0] + 0.9 * (r[-1] - r[0])
    above = np.nonzero(r >= level)[0]
    if not len(above) or r[-1] <= r[0]:
        return None
    k = above[0]
    if k == 0:
        return 0.0
    return float(t[k - 1] + (level - r[k - 1]) / (r[k] - r[k - 1]) * (t[k] - t[k - 1]))
