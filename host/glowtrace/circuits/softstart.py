"""A soft start judged on the tubes' own models: the figures of a design
(preheat resistor and bypass, or a supply ramp) beside those of a plain
switch-on from the same supply."""

import numpy as np

from .simulate import Circuit, CircuitError, Heater, Run, energy, simulate, warmup_90

SETTLE_TAU = 25.0  # simulate this many sleeve time constants (as the analysis does)
FAR_ABOVE = 3.0    # a supply past this many times the rating is no soft start

CAUTIONS = (
    "Preheat and dropping resistors run hot: rate them for the power shown, mount them "
    "clear of wiring, and let them cool before touching.",
    "A MOSFET in linear mode can fail short: keep the heater supply's fuse in circuit.",
    "The equipment these heaters sit in shares its chassis with lethal plate voltages, and "
    "a series-string set's chassis can be tied to the mains: disconnect it from the "
    "mains, discharge the filter capacitors, work on such a set through an isolation "
    "transformer, follow your local electrical codes, and leave mains work to someone "
    "licensed for it where they require it.",
)


def sim_length(heaters: list[Heater], c: Circuit) -> float:
    slowest = max(max(25.0 * h.model.tau_s, 10.0 * h.model.tau_w) for h in heaters)
    extra = max(c.bypass_s or 0.0, c.ramp_s)
    return min(600.0, max(30.0, slowest) + extra)


def figures(run: Run, c: Circuit, heaters: list[Heater]) -> dict:
    """The JSON keys of `glowtrace softstart` for one run."""
    t, cur = run.t, run.current
    out = {"peak_current_a": float(cur.max()),
           "peak_current_before_bypass_a": None, "heater_volts_at_bypass": None,
           "peak_current_after_bypass_a": None,
           "resistor_peak_power_w": float(run.resistor_w.max()) if c.series_ohm else None,
           "resistor_energy_j": energy(t, run.resistor_w) if c.series_ohm else None}
    if c.bypass_s is not None and c.bypass_s < t[-1]:
        before, after = t < c.bypass_s, t >= c.bypass_s
        k = int(np.nonzero(before)[0][-1])
        out["peak_current_before_bypass_a"] = float(cur[before].max())
        out["heater_volts_at_bypass"] = float(run.heater_v[:, k].max())
        out["peak_current_after_bypass_a"] = float(cur[after].max())
    if run.mosfet_w is not None:  # linear mode while the gate rises
        out["mosfet_peak_power_w"] = float(run.mosfet_w.max())
        out["mosfet_energy_j"] = energy(t, run.mosfet_w)
    if run.ntc_w is not None:
        out["ntc_peak_power_w"] = float(run.ntc_w.max())
        out["ntc_energy_j"] = energy(t, run.ntc_w)
        out["ntc_settled_k"] = float(run.ntc_k[-1])
        out["ntc_settled_ohm"] = float(c.ntc.resistance(run.ntc_k[-1]))
    flashing = [j for j, h in enumerate(heaters) if h.model.f > 0]
    out["flash_peak_k"] = (float(max(run.exposed_k[j].max() for j in flashing))
                           if flashing else None)
    out["flash_settled_k"] = (float(max(run.exposed_k[j, -1] for j in flashing))
                              if flashing else None)
    warm = [warmup_90(t, run.heater_r[j]) for j in range(len(heaters))]
    out["warmup_90_s"] = max(w for w in warm if w is not None) if any(
        w is not None for w in warm) else None
    out["heaters"] = [{"heater": h.name, "peak_current_a": float(run.heater_i[j].max()),
                       "settled_volts": float(run.heater_v[j, -1]),
                       "settled_current_a": float(run.heater_i[j, -1]),
                       "warmup_90_s": warm[j],
                       "flash_peak_k": float(run.exposed_k[j].max()) if j in flashing
                       else None} for j, h in enumerate(heaters)]
    return out


def study(db_path, sources: list[str], circuit: dict, section: str | None = None,
          recommend: str | None = None, max_warmup_s: float | None = None,
          **csv_options) -> tuple[dict, Run, Run, list[Heater]]:
    """`glowtrace softstart`: the heaters from their sources, in parallel on
    one supply (default: their rated voltage), the design against a plain
    switch-on; with `recommend` (series, ramp or both) the design is the one
    searched for, under `recommended`. Returns (figures, design run, plain
    run, heaters)."""
    from .sources import resolve
    heaters = resolve(db_path, sources, section, **csv_options)
    rated = [h.rated_v for h in heaters if h.rated_v]
    if circuit.get("supply_v") is None:
        if not rated:
            raise CircuitError("no rated voltage known for these heaters: give --supply-v")
        circuit = dict(circuit, supply_v=max(rated))
    if rated and circuit["supply_v"] > FAR_ABOVE * max(rated):
        raise CircuitError(f"{circuit['supply_v']:g} V is far above these heaters' rated "
                           f"{max(rated):g} V: heaters in parallel run from their own rated "
                           "voltage (a series string is `glowtrace string`)")
    circuit = dict(circuit)
    vth_max = circuit.pop("vth_max", None)
    if circuit.get("mosfet") is not None and circuit["mosfet"].drive_v is None:
        from dataclasses import replace  # a gate drive 10 V above the supply
        circuit["mosfet"] = replace(circuit["mosfet"], drive_v=circuit["supply_v"] + 10.0)
    if recommend:
        from .recommend import recommend as search
        found = search(heaters, Circuit(**circuit), recommend, max_warmup_s)
        rec = found["recommended"]
        if rec["kind"] == "series":
            circuit.update(series_ohm=rec["series_ohm"], bypass_s=rec["bypass_s"])
        else:
            from .simulate import Mosfet
            circuit["mosfet"] = Mosfet(rec["gate_ohm"], rec["gate_uf"] * 1e-6,
                                       rec["gate_drive_v"], rec["vth"])
    out, run, plain = evaluate(Circuit(**circuit), heaters)
    out["supply_v"] = circuit["supply_v"]
    if recommend:
        out["recommended"] = rec
    if vth_max is not None and circuit.get("mosfet") is not None:
        # the data sheet's threshold spread: the same design at its highest threshold
        from dataclasses import replace
        worst = Circuit(**dict(circuit, mosfet=replace(circuit["mosfet"], vth=vth_max)))
        hi, _, _ = evaluate(worst, heaters)
        out["at_vth_max"] = {k: hi[k] for k in ("peak_current_a", "warmup_90_s",
                                                "flash_peak_k", "mosfet_peak_power_w",
                                                "mosfet_energy_j")}
        settled = min(x["settled_volts"] for x in hi["heaters"])
        if settled < 0.95 * circuit["supply_v"]:
            out["warnings"].append(
                f"at the highest threshold ({vth_max:g} V) the heaters settle at "
                f"{settled:.2f} V: the gate drive does not turn the MOSFET fully on")
    out["cautions"] = list(CAUTIONS)
    return out, run, plain, heaters


def evaluate(c: Circuit, heaters: list[Heater]) -> tuple[dict, Run, Run]:
    """(figures with `plain` and `warnings`, the design's run, the plain
    switch-on's run)."""
    t_end = sim_length(heaters, c)
    run = simulate(c, heaters, t_end)
    plain_c = Circuit(c.supply_v, c.source_ohm, series=c.series)
    plain_run = simulate(plain_c, heaters, t_end)
    out = figures(run, c, heaters)
    out["plain"] = figures(plain_run, plain_c, heaters)
    out["warnings"] = warnings(out, c, heaters)
    return out, run, plain_run


def warnings(out: dict, c: Circuit, heaters: list[Heater]) -> list[str]:
    w = []
    rated = [h.rated_v for h in heaters if h.rated_v]
    if rated and not c.series:
        hot_v = max(x["settled_volts"] for x in out["heaters"])
        if hot_v > 1.05 * max(rated):
            w.append(f"the heaters settle at {hot_v:.2f} V, more than 5 % above their "
                     f"rated {max(rated):g} V: lower the supply")
        if hot_v < 0.95 * min(rated):
            w.append(f"the heaters settle at {hot_v:.2f} V, more than 5 % below their rated "
                     f"{min(rated):g} V: what is in series drops too much (a resistor never "
                     "bypassed, an NTC, the source resistance)")
    if c.series_ohm and c.bypass_s is not None and out["peak_current_after_bypass_a"] and \
            out["peak_current_after_bypass_a"] > 0.8 * out["plain"]["peak_current_a"]:
        w.append("the bypass closes on heaters still nearly cold: its inrush is "
                 f"{out['peak_current_after_bypass_a']:.2f} A against "
                 f"{out['plain']['peak_current_a']:.2f} A switched on plainly (a later "
                 "bypass or a smaller resistor preheats more)")
    if not any(h.model.f > 0 for h in heaters):
        w.append("no exposed share was fitted for these heaters (no flash seen): the flash "
                 "temperatures are not given")
    return w
