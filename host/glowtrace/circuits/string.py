"""A series string: heaters of one current rating in series across one
supply (a radio's or a TV set's heaters across the mains, through a
dropper). A heater that warms faster than the others takes more than its
share of the voltage while they are still cold: each heater's peak voltage
over its rating, and how long it stays above 110 %, tell which tube suffers.

The supply is taken as DC of the same RMS value: the heaters' time constants
are far longer than a mains cycle, so their heating follows the RMS."""

import math
from functools import lru_cache

import eseries
import numpy as np

from .. import catalogue
from ..analysis.thermal import ThermalModel
from ..errors import GlowtraceError
from ..logbook.store import Store
from .simulate import Circuit, Heater, Ntc, Run, simulate
from .softstart import CAUTIONS, sim_length
from .sources import SourceError, from_tube

OVER = 1.10              # a heater above 110 % of its rated volts is over-volted
SAME_CURRENT = 0.05      # ratings further apart than this are not one string
# a typical heater when only its type is known: the hot/cold ratio of a
# tungsten heater near 1100-1400 K, and the wire's settling below the sleeve
# (common practice for indirectly heated cathodes; the simulator's presets)
TYPICAL_RATIO = 6.5
TYPICAL = {"dt_ws": 150.0, "tau_w": 0.3, "tau_s": 3.5}
# a typical disc NTC inrush limiter, when the user gives none (from memory of
# data sheets; check the part you buy): B value, dissipation constant, time
# constant; its R25 is taken as the string's cold resistance
TYPICAL_NTC = {"beta": 3000.0, "dissipation_w_per_k": 0.015, "tau_s": 60.0}


class StringError(GlowtraceError):
    pass


@lru_cache(maxsize=64)
def typical_model(type_name: str) -> tuple[ThermalModel, list[str]]:
    """A typical model of a type's heater from its rating; where the type has
    a rated (controlled) warm-up time, its sleeve's time constant is set so
    that tube data's series warm-up test circuit gives that time."""
    from ..analysis.analyze import predict
    t = catalogue.load().get(type_name)
    r = t.section_rating() if not t.centre_tapped else t.series
    r_hot = r.volts / r.amps
    model = ThermalModel(r20=r_hot / TYPICAL_RATIO, k=t.tungsten_k, t_amb_k=293.15,
                         r_hot=r_hot, p_hot=r.volts * r.amps, **TYPICAL)
    notes = [f"{t.name}: a typical model for the type from its rating, not a measured tube"]
    if t.controlled_warmup_s:
        lo, hi = 0.2, 60.0  # bisect tau_s on the series warm-up time
        for _ in range(14):  # the ratio of 300 bisected to 0.04 %
            model.tau_s = math.sqrt(lo * hi)
            got = predict(model, r.volts, r.amps, t_end=120.0)["series_warmup_s"] or 0.0
            lo, hi = (model.tau_s, hi) if got < t.controlled_warmup_s else (lo, model.tau_s)
        notes[0] += (f", its sleeve set to the rated {t.controlled_warmup_s:g} s warm-up "
                     "(within 2 %)")
    return model, notes


def _heater(store: Store | None, source: str, notes: list) -> tuple[Heater, str]:
    """A tube label (its newest good cold start) or a type name."""
    tube = store.tube(source) if store is not None else None
    if tube:
        if not tube.get("type"):
            raise StringError(f"tube {source!r} has no type recorded: its rating is unknown")
        t = catalogue.load().get(tube["type"])
        h = from_tube(store, source, None)
        r = t.section_rating() if not t.centre_tapped else t.series
        return Heater(source, h.model, r.volts, r.amps), t.name
    try:
        t = catalogue.load().get(source)
    except catalogue.UnknownType:
        raise SourceError(f"{source!r} is neither a tube in the logbook nor a tube type") \
            from None
    model, why = typical_model(t.name)
    notes.extend(why)
    r = t.section_rating() if not t.centre_tapped else t.series
    return Heater(t.name, model, r.volts, r.amps), t.name


def heater_figures(run: Run, heaters: list[Heater], types: list[str]) -> list[dict]:
    out = []
    dt = np.diff(run.t, append=run.t[-1])
    for j, (h, kind) in enumerate(zip(heaters, types)):
        v = run.heater_v[j]
        k = int(np.argmax(v))
        out.append({"tube": h.name, "type": kind, "rated_volts": h.rated_v,
                    "peak_volts": float(v[k]), "peak_ratio": float(v[k] / h.rated_v),
                    "peak_at_s": float(run.t[k]), "settled_volts": float(v[-1]),
                    "over_110pct_s": float(dt[v > OVER * h.rated_v].sum())})
    return out


def run_string(heaters: list[Heater], types: list[str], supply_v: float, source_ohm: float,
               series_ohm: float, ntc: Ntc | None) -> tuple[dict, Run]:
    c = Circuit(supply_v, source_ohm, series_ohm, series=True, ntc=ntc)
    run = simulate(c, heaters, sim_length(heaters, c))
    figs = heater_figures(run, heaters, types)
    worst = max(figs, key=lambda f: f["peak_ratio"])
    return {"heaters": figs, "peak_current_a": float(run.current.max()),
            "settled_current_a": float(run.current[-1]), "worst": worst["tube"],
            "worst_peak_ratio": worst["peak_ratio"]}, run


def study_string(db_path, sources: list[str], supply_v: float, source_ohm: float = 0.0,
                 series_ohm: float = 0.0, ntc: Ntc | None = None) -> tuple[dict, Run, list]:
    """`glowtrace string`: the heaters in series in the order given, their
    peaks over their ratings, and the remedies (a dropper sized to the
    rating, an NTC) with the worst peak each gives."""
    notes: list[str] = []
    from pathlib import Path
    store = Store(db_path, create=False) if Path(db_path).exists() else None
    try:
        pairs = [_heater(store, s, notes) for s in sources]
    finally:
        if store is not None:
            store.close()
    heaters, types = [p[0] for p in pairs], [p[1] for p in pairs]
    amps = [h.rated_a for h in heaters]
    if max(amps) > (1 + SAME_CURRENT) * min(amps):
        listed = ", ".join(f"{h.name} {h.rated_a:g} A" for h in heaters)
        raise StringError(f"a series string needs heaters of one current rating; these "
                          f"differ ({listed})")
    rated_sum = sum(h.rated_v for h in heaters)
    if supply_v > 3 * rated_sum + series_ohm * min(amps) * 3:
        raise StringError(f"{supply_v:g} V is far above these heaters' {rated_sum:g} V in "
                          "all: give the supply they run from, and the dropper in --series-ohm")
    out, run = run_string(heaters, types, supply_v, source_ohm, series_ohm, ntc)
    out.update(supply_v=supply_v, series_ohm=series_ohm, rated_sum_volts=rated_sum)
    remedies = []
    excess = supply_v - rated_sum
    if excess > 0:
        need = excess / min(amps) - source_ohm
        value = eseries.find_nearest(eseries.E24, max(need, 0.1))
        r, _ = run_string(heaters, types, supply_v, source_ohm, value, ntc)
        remedies.append({"remedy": "dropper", "series_ohm": value,
                         "power_w": value * min(amps) ** 2,
                         "worst": r["worst"], "worst_peak_ratio": r["worst_peak_ratio"],
                         "settled_current_a": r["settled_current_a"]})
    if ntc is None:
        cold = sum(h.model.r20 for h in heaters)
        r25 = eseries.find_nearest(eseries.E12, cold)
        ntc_used, typical = Ntc(r25=r25, **TYPICAL_NTC), True
    else:
        ntc_used, typical = ntc, False
    base = remedies[0]["series_ohm"] if remedies else series_ohm
    r, _ = run_string(heaters, types, supply_v, source_ohm, base, ntc_used)
    remedies.append({"remedy": "NTC" + (" (typical, from memory of data sheets)"
                                        if typical else ""),
                     "ntc": vars(ntc_used), "with_series_ohm": base,
                     "worst": r["worst"], "worst_peak_ratio": r["worst_peak_ratio"],
                     "settled_current_a": r["settled_current_a"]})
    out["remedies"] = remedies
    out["warnings"] = notes + ([f"{out['worst']} peaks at {out['worst_peak_ratio']:.0%} of its "
                                "rated volts"] if out["worst_peak_ratio"] > OVER else [])
    out["cautions"] = list(CAUTIONS)
    return out, run, heaters
