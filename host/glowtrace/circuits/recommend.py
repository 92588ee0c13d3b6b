"""A soft start chosen on the tubes' own models: a preheat resistor and the
delay of its bypass, or a supply ramp made by a gate-charged MOSFET
follower, searched over preferred values (IEC 60063 E-series, from the
`eseries` package) for the lowest flash (the exposed share's peak
temperature; the peak current where no share was fitted) within a warm-up
time the user accepts.

Why a search and not a rule: too large a preheat resistor preheats too
little, and the bypass is then nearly a cold start again; too early a
bypass, the same. Each candidate is simulated on a coarser grid; the chosen
one again in full."""

import math
from dataclasses import replace

import eseries

from .simulate import Circuit, Heater, Mosfet, simulate
from .softstart import evaluate, sim_length

BYPASS_S = (0.5, 1.0, 2.0, 3.0, 5.0, 8.0)
RAMP_S = (0.25, 0.5, 1.0, 1.5, 2.0, 3.0, 5.0)
SEARCH_POINTS = 100          # grid of a candidate's simulation (the final one: 300)
DERATE = 2.0                 # a resistor rated for twice its power (common practice)
POWER_RATINGS = (0.25, 0.5, 1, 2, 3, 5, 7, 10, 17, 25, 50, 100)   # W, as sold
SWITCH_RATINGS = (1, 2, 3, 5, 10, 16, 20, 30)                      # A, relay contacts
GATE_C_UF = 10.0             # the gate capacitor (a preferred value); R sets the time
VTH_TYPICAL = 3.0            # V, a logic-level MOSFET's typical threshold (common practice)


def _score(run, heaters) -> float:
    """What is minimised: the flashing share's peak temperature, else the
    peak current."""
    flashing = [j for j, h in enumerate(heaters) if h.model.f > 0]
    if flashing:
        return float(max(run.exposed_k[j].max() for j in flashing))
    return float(run.current.max())


def _warmup(run) -> float:
    from .simulate import warmup_90
    w = [warmup_90(run.t, run.heater_r[j]) for j in range(run.heater_r.shape[0])]
    return max(x for x in w if x is not None) if any(x is not None for x in w) else math.inf


def _first_at_least(values, x):
    return next((v for v in values if v >= x), values[-1])


def series_candidates(heaters: list[Heater], supply_v: float) -> list[float]:
    """E12 values from a quarter to three times the heaters' hot resistance in
    parallel: below it the resistor does little, above it it preheats little."""
    hot = 1.0 / sum(1.0 / h.model.r_hot for h in heaters)
    return [float(r) for r in eseries.erange(eseries.E12, 0.25 * hot, 3.0 * hot)]


def gate_rc(ramp_s: float, supply_v: float, drive_v: float, vth: float) -> tuple[float, float]:
    """Gate R (E12) and C (GATE_C_UF) for a follower that reaches the supply
    in about ramp_s: the gate reaches supply + vth at t = RC ln(Vd / (Vd - Vs - Vth))."""
    tau = ramp_s / math.log(drive_v / (drive_v - supply_v - vth))
    r = eseries.find_nearest(eseries.E12, tau / (GATE_C_UF * 1e-6))
    return float(r), GATE_C_UF


def search(heaters: list[Heater], base: Circuit, kind: str, max_warmup_s: float | None):
    """[(score, warm-up, circuit, ramp time or None)] of every candidate,
    best first, within the warm-up allowed."""
    t_end = sim_length(heaters, replace(base, bypass_s=max(BYPASS_S)))
    found = []
    if kind in ("series", "both"):
        for r in series_candidates(heaters, base.supply_v):
            for tb in BYPASS_S:
                c = replace(base, series_ohm=r, bypass_s=tb)
                run = simulate(c, heaters, t_end, n=SEARCH_POINTS)
                found.append((_score(run, heaters), _warmup(run), c, None))
    if kind in ("ramp", "both"):
        drive = base.supply_v + 10.0
        for tr in RAMP_S:
            r, cu = gate_rc(tr, base.supply_v, drive, VTH_TYPICAL)
            c = replace(base, mosfet=Mosfet(r, cu * 1e-6, drive, VTH_TYPICAL))
            run = simulate(c, heaters, t_end, n=SEARCH_POINTS)
            found.append((_score(run, heaters), _warmup(run), c, tr))
    ok = [f for f in found if max_warmup_s is None or f[1] <= max_warmup_s]
    return sorted(ok, key=lambda f: (round(f[0], 1), f[1]))


def recommend(heaters: list[Heater], base: Circuit, kind: str = "both",
              max_warmup_s: float | None = None) -> dict:
    """The best design, with its ratings and why; raises if none fits."""
    from .simulate import CircuitError
    plain = simulate(base, heaters, sim_length(heaters, base), n=SEARCH_POINTS)
    limit = max_warmup_s if max_warmup_s is not None else 2.0 * _warmup(plain)
    ranked = search(heaters, base, kind, limit)
    if not ranked:
        raise CircuitError(f"no design warms up within {limit:.1f} s: allow a longer "
                           "--max-warmup-s")
    _, _, best, ramp_s = ranked[0]
    out, _, _ = evaluate(best, heaters)
    rec = {"kind": "series" if best.mosfet is None else "ramp",
           "flash_peak_k": out["flash_peak_k"], "warmup_90_s": out["warmup_90_s"],
           "peak_current_a": out["peak_current_a"], "max_warmup_s": limit}
    if best.mosfet is None:
        stuck, _, _ = evaluate(replace(best, bypass_s=None), heaters)
        stuck_w = best.series_ohm * (stuck["heaters"][0]["settled_current_a"]
                                     * (1 if best.series else len(heaters))) ** 2
        rec.update(series_ohm=best.series_ohm, bypass_s=best.bypass_s,
                   resistor_peak_power_w=out["resistor_peak_power_w"],
                   resistor_energy_j=out["resistor_energy_j"],
                   resistor_power_if_never_bypassed_w=stuck_w,
                   # rated for twice the larger of its mean power while preheating
                   # and its power with the bypass stuck open
                   resistor_rating_w=_first_at_least(
                       POWER_RATINGS, DERATE * max(stuck_w,
                                                   out["resistor_energy_j"] / best.bypass_s)),
                   bypass_switch_rating_a=_first_at_least(
                       SWITCH_RATINGS, DERATE * out["peak_current_after_bypass_a"]))
        rec["why"] = _why_series(best, out, heaters)
    else:
        m = best.mosfet
        rec.update(ramp_s=ramp_s, gate_ohm=m.gate_ohm, gate_uf=m.gate_f * 1e6, gate_drive_v=m.drive_v,
                   vth=m.vth, mosfet_peak_power_w=out["mosfet_peak_power_w"],
                   mosfet_energy_j=out["mosfet_energy_j"],
                   caution="choose a MOSFET rated for linear operation, inside its safe "
                           "operating area for this power and time, and keep the fuse")
        rec["why"] = (f"a gate of {m.gate_ohm:g} ohm and {m.gate_f * 1e6:g} uF brings the "
                      f"heaters up over about {rec['ramp_s']:g} s: the flash peak falls to "
                      f"{_k(out['flash_peak_k'])} from {_k(out['plain']['flash_peak_k'])} "
                      "switched on plainly, with no second inrush, at the cost of the "
                      "MOSFET dissipating while it ramps")
    return {"recommended": rec, "figures": out, "candidates": len(ranked)}


def _k(x) -> str:
    return "-" if x is None else f"{x:.0f} K"


def _why_series(best: Circuit, out: dict, heaters) -> str:
    """One sentence: why this resistor and delay, from the neighbours'
    simulated figures."""
    t_end = sim_length(heaters, best)
    bigger = [r for r in series_candidates(heaters, best.supply_v) if r > best.series_ohm]
    earlier = [t for t in BYPASS_S if t < best.bypass_s]
    parts = []
    if bigger:
        run = simulate(replace(best, series_ohm=bigger[0]), heaters, t_end, n=SEARCH_POINTS)
        parts.append(f"{bigger[0]:g} ohm would preheat less (its bypass inrush "
                     f"{run.current[run.t >= best.bypass_s].max():.2f} A against "
                     f"{out['peak_current_after_bypass_a']:.2f} A)")
    if earlier:
        run = simulate(replace(best, bypass_s=earlier[-1]), heaters, t_end, n=SEARCH_POINTS)
        parts.append(f"a bypass at {earlier[-1]:g} s would close on a cooler heater (flash "
                     f"peak {_k(_score(run, heaters) if heaters[0].model.f else None)})")
    return (f"{best.series_ohm:g} ohm brings the heaters to {out['heater_volts_at_bypass']:.2f} V "
            f"before the bypass at {best.bypass_s:g} s, so the flash peaks at "
            f"{_k(out['flash_peak_k'])} instead of {_k(out['plain']['flash_peak_k'])}"
            + ("; " + " and ".join(parts) if parts else "") + ".")
