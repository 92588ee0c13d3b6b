"""Circuits around heaters: `softstart` (a preheat resistor and its bypass, or a
supply ramp, judged on the tubes' own fitted models)."""

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
        ("warmup_90_s", "warm-up to 90 %", "s")]


def cmd_softstart(args) -> int:
    from ..circuits.softstart import study
    if args.plot:  # checked before the work, not after
        args.plot = str(outfile.check(args.plot, outfile.FIGURE, ".png"))
    if args.bypass_s is not None and not args.series_ohm:
        raise GlowtraceError("--bypass-s needs --series-ohm (the resistor it shorts)")
    if args.ramp_s and args.series_ohm:
        raise GlowtraceError("give either --series-ohm (and --bypass-s) or --ramp-s")
    circuit = {"supply_v": args.supply_v, "source_ohm": args.source_ohm,
               "series_ohm": args.series_ohm or 0.0, "bypass_s": args.bypass_s,
               "ramp_s": args.ramp_s or 0.0}
    out, run, plain, heaters = study(db_path(args), args.source, circuit, args.section,
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
        if r["warnings"]:
            hanging(ui.err, [Text(w, style=ui.WARN) for w in r["warnings"]], bullet="! ")
        from ..outputs.plots import circuit_terminal_plot
        ui.out.print(Text.from_ansi(circuit_terminal_plot(run, plain, min(ui.out.width, 100))),
                     soft_wrap=True)
        hanging(ui.out, [Text(c, style="dim") for c in r["cautions"]], bullet="  ")
    ui.emit(args, out, render)
    if args.plot:
        ui.err.print(f"wrote {args.plot}", markup=False)
    return 0


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
    s.add_argument("--ambient-c", type=number(-40, 80), help="for a CSV SOURCE: room, C")
    s.add_argument("--type", help="for a CSV SOURCE: tube type (sets the rating)")
    s.add_argument("--rated-volts", type=number(0, above=True), help="for a CSV SOURCE")
    s.add_argument("--rated-amps", type=number(0, above=True), help="for a CSV SOURCE")
    s.add_argument("--plot", metavar="FILE.png", help="also write a matplotlib figure")
    s.set_defaults(func=cmd_softstart)
