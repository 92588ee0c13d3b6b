"""The same circuit and heater models as an ngspice deck: each heater a
behavioural subcircuit whose thermal nodes are node voltages (kelvin) on
capacitors (their heat capacities, J/K), heated by behavioural current
sources (watts) and cooled by conduction (a resistor of 1/G) and radiation
(K (T^4 - Ta^4)); its resistance is the tungsten table as a piecewise-linear
function of the wire's temperature, exactly the analysis's 10 K grid. Used
to check the circuit simulation against an independent integrator
(tests/test_softstart.py), and for anyone who wants to take a heater's
model into their own circuit simulator."""

import numpy as np

from ..analysis.physics.tungsten import fast_ratio
from .simulate import Circuit, Heater


def _pwl(k: float) -> str:
    a = fast_ratio(k)
    pts = ", ".join(f"{a.t0 + i * a.step:g}, {r:.9g}" for i, r in enumerate(a.r))
    return f"pwl(V({{x}}), {pts})"


def heater_subckt(name: str, h: Heater, t0_k: float) -> str:
    """.subckt NAME a b: a heater between nodes a and b."""
    m = h.model
    _, g, k_s, c_w, c_s, k_x, c_x, _ = m.constants()
    ta4 = m.t_amb_k ** 4
    r20m, r20x = m.r20 * (1 - m.f), m.r20 * m.f
    ratio = _pwl(m.k)
    res = f"{r20m:.9g}*{ratio.format(x='tw')}"
    if r20x:
        res += f" + {r20x:.9g}*{ratio.format(x='tx')}"
    lines = [f".subckt {name} a b",
             f"Br r 0 V = {res}",
             "Bh a b I = V(a,b)/V(r)",
             f"Cw tw 0 {c_w:.9g} IC={t0_k:g}",
             f"Bpw 0 tw I = (V(a,b)/V(r))^2*{r20m:.9g}*{ratio.format(x='tw')}",
             f"Rg tw ts {1.0 / g:.9g}",
             f"Cs ts 0 {c_s:.9g} IC={t0_k:g}",
             f"Brs ts 0 I = {k_s:.9g}*(V(ts)^4 - {ta4:.9g})"]
    if r20x:
        lines += [f"Cx tx 0 {c_x:.9g} IC={t0_k:g}",
                  f"Bpx 0 tx I = (V(a,b)/V(r))^2*{r20x:.9g}*{ratio.format(x='tx')}",
                  f"Brx tx 0 I = {k_x:.9g}*(V(tx)^4 - {ta4:.9g})"]
    else:
        lines += ["Rtx tx 0 1"]
    lines.append(f".ends {name}")
    return "\n".join(lines)


def deck(c: Circuit, heaters: list[Heater], t_end: float, out_file: str,
         t0_k: float = 293.15) -> str:
    """An ngspice deck that writes time, supply current, each heater's
    voltage and each heater's exposed-share temperature to out_file."""
    c.check()
    if c.ntc is not None or c.mosfet is not None:
        raise ValueError("the deck covers supply, ramp, source and series resistor, bypass")
    parts = ["* glowtrace: heaters on their fitted models (circuits/spice.py)",
             ".options reltol=1e-5 abstol=1e-9 vntol=1e-6"]
    for j, h in enumerate(heaters):
        parts.append(heater_subckt(f"heater{j}", h, t0_k))
    if c.ramp_s > 0:
        parts.append(f"Vs sup 0 PWL(0 0 {c.ramp_s:g} {c.supply_v:g})")
    else:
        parts.append(f"Vs sup 0 DC {c.supply_v:g}")
    parts.append(f"Rsrc sup n1 {max(c.source_ohm, 1e-6):g}")
    if c.series_ohm:
        parts.append(f"Rser n1 node {c.series_ohm:g}")
        if c.bypass_s is not None:
            parts += [f"Vctl ctl 0 PWL(0 0 {c.bypass_s:.9g} 0 {c.bypass_s + 1e-6:.9g} 1)",
                      "Sbyp n1 node ctl 0 bypass",
                      ".model bypass sw(vt=0.5 vh=0.1 ron=1e-6 roff=1e12)"]
    else:
        parts.append("Rser n1 node 1e-6")
    probes = ["I(Vs)"]
    if c.series:
        nodes = ["node"] + [f"m{j}" for j in range(1, len(heaters))] + ["0"]
        for j in range(len(heaters)):
            parts.append(f"X{j} {nodes[j]} {nodes[j + 1]} heater{j}")
            if 0 < j:  # a node between two behavioural sources needs a DC path
                parts.append(f"Rleak{j} {nodes[j]} 0 1e9")
            probes.append(f"V({nodes[j]},{nodes[j + 1]})" if nodes[j + 1] != "0"
                          else f"V({nodes[j]})")
    else:
        for j in range(len(heaters)):
            parts.append(f"X{j} node 0 heater{j}")
            probes.append("V(node)")
    probes += [f"V(x{j}.tx)" for j in range(len(heaters))]
    parts += [f".tran 1e-5 {t_end:g} 0 {t_end / 2000:g} uic",
              ".control", "set wr_singlescale", "set wr_vecnames", "run",
              f"wrdata {out_file} {' '.join(probes)}", ".endc", ".end"]
    return "\n".join(parts) + "\n"


def read_wrdata(path: str) -> np.ndarray:
    """ngspice's wrdata table (one header row, single time column)."""
    return np.loadtxt(path, skiprows=1)
