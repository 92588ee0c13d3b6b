"""Circuits around heaters: `softstart` (a preheat resistor and its bypass, or a
supply ramp, judged on the tubes' own fitted models) and `string` (heaters in
series across one supply)."""

from rich.text import Text

from .. import outfile
from ..errors import GlowtraceError
from . import console as ui
from .common import db_path, number
from .tables import Col, fit, hanging

ROWS = [("peak_current_a", "peak supply current", "A"),
        ("peak_current_before_bypass_a", "peak current before the bypass", "A"),
        ("heater_volts_at_bypass", "heater volts when bypassed", "V"),
        ("peak_current_after_bypass_a", "peak current after the bypass", "A"),
        ("resistor_peak_power_w", "series resistor, peak power", "W"),
        ("resistor_energy_j", "series resistor, energy", "J"),
        ("flash_peak_k", "exposed share, peak temperature", "K"),
        ("flash_settled_k", "exposed share, settled", "K"),
        ("warmup_90_s", "warm-up to 90 %", "s"),
        ("mosfet_peak_power_w", "MOSFET, peak power (linear mode)", "W"),
        ("mosfet_energy_j", "MOSFET, energy", "J"),
        ("ntc_peak_power_w", "NTC, peak power", "W"),
        ("ntc_settled_ohm", "NTC, settled resistance", "ohm")]


def cmd_softstart(args) -> int:
    from ..circuits.softstart import study
    if args.plot:  # checked before the work, not after
        args.plot = str(outfile.check(args.plot, outfile.FIGURE, ".png"))
    if args.bypass_s is not None and not args.series_ohm:
        raise GlowtraceError("--bypass-s needs --series-ohm (the resistor it shorts)")
    kinds = [bool(args.series_ohm), bool(args.ramp_s), args.gate_ohm is not None]
    if args.recommend and any(kinds):
        raise GlowtraceError("--recommend chooses the design itself: leave out --series-ohm, "
                             "--ramp-s and the MOSFET's values")
    if sum(kinds) > 1:
        raise GlowtraceError("give one design: --series-ohm (and --bypass-s), --ramp-s, or "
                             "the MOSFET's --gate-ohm, --gate-uf and --vth")
    mosfet = None
    if args.gate_ohm is not None or args.gate_uf is not None or args.vth is not None:
        if None in (args.gate_ohm, args.gate_uf, args.vth):
            raise GlowtraceError("a MOSFET follower needs --gate-ohm, --gate-uf and --vth")
        from ..circuits.simulate import Mosfet
        mosfet = Mosfet(args.gate_ohm, args.gate_uf * 1e-6, args.gate_drive_v, args.vth,
                        args.rds_on)
    circuit = {"supply_v": args.supply_v, "source_ohm": args.source_ohm,
               "series_ohm": args.series_ohm or 0.0, "bypass_s": args.bypass_s,
               "ramp_s": args.ramp_s or 0.0, "ntc": args.ntc, "mosfet": mosfet,
               "vth_max": args.vth_max}
    out, run, plain, heaters = study(db_path(args), args.source, circuit, args.section,
                                     recommend=args.kind if args.recommend else None,
                                     max_warmup_s=args.max_warmup_s,
                                     ambient_c=args.ambient_c, type_name=args.type,
                                     rated_v=args.rated_volts, rated_a=args.rated_amps)
    if args.plot:
        from ..outputs.plots import circuit_figure
        circuit_figure(run, plain, args.plot, ", ".join(h.name for h in heaters))

    def render(r):
        fit(ui.out, [Col("figure"), Col("this design", justify="right"),
                     Col("plain switch-on", justify="right"), Col("unit")],
            [[label, ui.fmt(r.get(k), 4), ui.fmt(r["plain"].get(k), 4), unit]
             for k, label, unit in ROWS
             if r.get(k) is not None or r["plain"].get(k) is not None],
            caption=f"{len(heaters)} heater(s) in parallel on {r['supply_v']:g} V: "
                    + ", ".join(h.name for h in heaters))
        if r.get("recommended"):
            _render_recommended(r["recommended"])
        from ..outputs.plots import circuit_terminal_plot
        _tail(r, circuit_terminal_plot(run, plain, min(ui.out.width, 100)))
    return _emit(args, out, render)


def _tail(r: dict, chart: str) -> None:
    """What every circuit command ends with: its warnings, its chart and the
    cautions."""
    if r["warnings"]:
        hanging(ui.err, [Text(w, style=ui.WARN) for w in r["warnings"]], bullet="! ")
    ui.out.print(Text.from_ansi(chart), soft_wrap=True)
    hanging(ui.out, [Text(c, style="dim") for c in r["cautions"]], bullet="  ")


def _emit(args, out: dict, render) -> int:
    ui.emit(args, out, render)
    if args.plot:
        ui.err.print(f"wrote {args.plot}", markup=False)
    return 0


def _render_recommended(rec: dict) -> None:
    if rec["kind"] == "series":
        rows = [("design", "preheat resistor, shorted by a switch after a delay"),
                ("resistor", f"{rec['series_ohm']:g} ohm (E12), rated {rec['resistor_rating_w']:g} W"
                             f" or more"),
                ("bypass after", f"{rec['bypass_s']:g} s"),
                ("resistor if never bypassed", f"{rec['resistor_power_if_never_bypassed_w']:.2f} W "
                                               "(a stuck relay); the rating is twice the larger "
                                               "of that and its mean power while preheating"),
                ("bypass switch", f"rated {rec['bypass_switch_rating_a']:g} A or more")]
    else:
        rows = [("design", "supply ramp: a MOSFET source follower, its gate charged "
                           "through R into C"),
                ("gate", f"{rec['gate_ohm']:g} ohm (E12) and {rec['gate_uf']:g} uF, from "
                         f"{rec['gate_drive_v']:g} V; threshold {rec['vth']:g} V typical"),
                ("ramp", f"about {rec['ramp_s']:g} s"),
                ("MOSFET in linear mode", f"peak {rec['mosfet_peak_power_w']:.2f} W, "
                                          f"{rec['mosfet_energy_j']:.2f} J"),
                ("caution", rec["caution"])]
    rows += [("why", rec["why"])]
    from .tables import pairs
    pairs(ui.out, rows, title="Recommended")


def parse_ntc(text: str):
    """R25,B,DISSIPATION_MW_PER_K,TAU_S as the data sheet gives them."""
    import argparse

    from ..circuits.simulate import Ntc
    try:
        r25, beta, diss, tau = (float(x) for x in text.split(","))
    except ValueError:
        raise argparse.ArgumentTypeError(
            "give R25,B,DISSIPATION_MW_PER_K,TAU_S, e.g. 120,3000,15,60") from None
    vals = (r25, beta, diss, tau)
    if not all(v > 0 and v < float("inf") for v in vals):
        raise argparse.ArgumentTypeError("every NTC value must be a positive number")
    return Ntc(r25, beta, diss / 1000.0, tau)


parse_ntc.__name__ = "NTC"


def cmd_string(args) -> int:
    from ..circuits.string import study_string
    if args.plot:
        args.plot = str(outfile.check(args.plot, outfile.FIGURE, ".png"))
    out, run, heaters = study_string(db_path(args), args.source, args.supply_v,
                                     args.source_ohm, args.series_ohm or 0.0, args.ntc)
    rated = [h.rated_v for h in heaters]
    if args.plot:
        from ..outputs.plots import string_figure
        string_figure(run, rated, args.plot, f"{len(heaters)} heaters in series on "
                      f"{args.supply_v:g} V")

    def render(r):
        fit(ui.out, [Col("tube"), Col("type", priority=1), Col("rated V", justify="right"),
                     Col("peak V", justify="right"), Col("peak/rated", justify="right"),
                     Col("at s", justify="right", priority=2),
                     Col("settled V", justify="right", priority=1),
                     Col("s over 110 %", justify="right")],
            [[h["tube"], h["type"], f"{h['rated_volts']:g}", ui.fmt(h["peak_volts"], 4),
              f"{100 * h['peak_ratio']:.0f} %", ui.fmt(h["peak_at_s"], 3),
              ui.fmt(h["settled_volts"], 4), ui.fmt(h["over_110pct_s"], 3)]
             for h in r["heaters"]],
            caption=f"In series on {r['supply_v']:g} V (rated {r['rated_sum_volts']:g} V in "
                    f"all): peak {r['peak_current_a']:.3g} A, settled "
                    f"{r['settled_current_a']:.3g} A; worst: {r['worst']}")
        lines = []
        for m in r["remedies"]:
            if m["remedy"] == "dropper":
                lines.append(f"a dropper of {m['series_ohm']:g} ohm (E24; it dissipates "
                             f"{m['power_w']:.1f} W: rate it for twice that): worst peak "
                             f"{100 * m['worst_peak_ratio']:.0f} % ({m['worst']})")
            else:
                n = m["ntc"]
                lines.append(f"{m['remedy']}: R25 {n['r25']:g} ohm, B {n['beta']:g} K"
                             + (f" with {m['with_series_ohm']:g} ohm" if m['with_series_ohm']
                                else "") + f": worst peak {100 * m['worst_peak_ratio']:.0f} % "
                             f"({m['worst']})")
        ui.out.print("Remedies:", markup=False)
        hanging(ui.out, lines)
        from ..outputs.plots import string_terminal_plot
        _tail(r, string_terminal_plot(run, rated, min(ui.out.width, 100)))
        ui.warn(out["caution"])
    from .. import safety
    # a series string is what AC/DC sets run: the set's chassis may be live
    out["caution"] = safety.MAINS_CHASSIS
    return _emit(args, out, render)


def register(sub, common) -> None:
    s = sub.add_parser(
        "softstart", parents=[common],
        help="a soft start on the tubes' own fitted models (preheat resistor or ramp)",
        description="Simulate heaters switched on through a preheat resistor that a "
                    "switch shorts after a delay, or from a supply ramped up from zero, "
                    "each heater its own fitted thermal model, against a plain switch-on "
                    "from the same supply. Several SOURCEs are heaters in parallel on one "
                    "supply.")
    s.add_argument("source", nargs="+", metavar="SOURCE",
                   help="a capture (UUID or unique prefix), a tube label (its latest good "
                        "cold start) or a CSV curve")
    s.add_argument("--section", choices=["A", "B"], help="the section of a capture or tube")
    s.add_argument("--supply-v", type=number(0, 400, above=True),
                   help="supply volts (default: the heaters' rated voltage)")
    s.add_argument("--source-ohm", type=number(0, 1e4), default=0.05,
                   help="resistance of the supply, leads and switch, ohm (default 0.05)")
    s.add_argument("--series-ohm", type=number(0, 1e5),
                   help="preheat (or dropping) resistor, ohm")
    s.add_argument("--bypass-s", type=number(0, 600, above=True),
                   help="when a switch shorts the resistor, s (default: never)")
    s.add_argument("--ramp-s", type=number(0, 600),
                   help="the supply rises linearly from 0 over this time, s (0: plain)")
    s.add_argument("--recommend", action="store_true",
                   help="search the designs (E-series values) for the lowest flash")
    s.add_argument("--kind", choices=["series", "ramp", "both"], default="both",
                   help="with --recommend: which designs to search (default both)")
    s.add_argument("--max-warmup-s", type=number(0, 600, above=True),
                   help="with --recommend: longest warm-up to 90 %% allowed, s (default: "
                        "twice a plain switch-on's)")
    s.add_argument("--ntc", type=parse_ntc, metavar="R25,B,MW_PER_K,TAU_S",
                   help="an NTC inrush limiter in series, from its data sheet: resistance "
                        "at 25 C, B value, dissipation constant (mW/K), time constant (s)")
    s.add_argument("--gate-ohm", type=number(0, 1e9, above=True),
                   help="MOSFET follower: gate resistor, ohm")
    s.add_argument("--gate-uf", type=number(0, 1e6, above=True),
                   help="MOSFET follower: gate capacitor, uF")
    s.add_argument("--vth", type=number(0, 20, above=True),
                   help="MOSFET follower: gate threshold V_GS(th), V (typical)")
    s.add_argument("--vth-max", type=number(0, 20, above=True),
                   help="the data sheet's highest threshold: the design is run there too")
    s.add_argument("--gate-drive-v", type=number(0, 500, above=True),
                   help="what the gate charges towards, V (default: supply + 10 V)")
    s.add_argument("--rds-on", type=number(0, 100), default=0.02,
                   help="MOSFET on-resistance, ohm (default 0.02)")
    s.add_argument("--ambient-c", type=number(-40, 80), help="for a CSV SOURCE: room, C")
    s.add_argument("--type", help="for a CSV SOURCE: tube type (sets the rating)")
    s.add_argument("--rated-volts", type=number(0, above=True), help="for a CSV SOURCE")
    s.add_argument("--rated-amps", type=number(0, above=True), help="for a CSV SOURCE")
    s.add_argument("--plot", metavar="FILE.png", help="also write a matplotlib figure")
    s.set_defaults(func=cmd_softstart)

    s = sub.add_parser(
        "string", parents=[common],
        help="heaters in series across one supply: which one is over-volted at start",
        description="Simulate heaters in series, in the order given, across one supply "
                    "(DC of the same RMS value as the mains): each heater's peak voltage "
                    "over its rating, and the remedies (a dropper, an NTC).")
    s.add_argument("source", nargs="+", metavar="SOURCE",
                   help="a tube label (its latest good cold start) or a tube type (a "
                        "typical model for the type)")
    s.add_argument("--supply-v", type=number(0, 400, above=True), required=True,
                   help="the supply across the string, V (RMS)")
    s.add_argument("--source-ohm", type=number(0, 1e4), default=0.0,
                   help="resistance of the supply and wiring, ohm (default 0)")
    s.add_argument("--series-ohm", type=number(0, 1e5), help="a dropper in the string, ohm")
    s.add_argument("--ntc", type=parse_ntc, metavar="R25,B,MW_PER_K,TAU_S",
                   help="an NTC in the string, from its data sheet: resistance at 25 C, "
                        "B value, dissipation constant (mW/K), thermal time constant (s)")
    s.add_argument("--plot", metavar="FILE.png", help="also write a matplotlib figure")
    s.set_defaults(func=cmd_string)
