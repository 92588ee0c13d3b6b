"""Commands on curves and types: `analyze` (a CSV curve from any instrument)
and `types` (the tube catalogue)."""

from pathlib import Path

from rich.text import Text

from . import console as ui
from .. import outfile
from .common import number
from .figures import figures_table, warnings
from .tables import Col, fit


def cmd_analyze(args) -> int:
    from ..analysis.analyze import analyze_file
    from ..outputs import plots
    if args.plot:  # checked before the work, not after
        args.plot = str(outfile.check(args.plot, outfile.FIGURE, ".png"))
    curve, result = analyze_file(args.file, args.ambient_c, args.type, args.rated_volts,
                                 args.rated_amps, fit_model=not args.no_fit)
    name = Path(args.file).name
    if args.plot:
        plots.figure(curve, result, args.plot, name)

    def render(r):
        figures_table({"value": r}, title=name + (f" ({r['type']})" if r.get("type") else ""))
        warnings(r["warnings"])
        ui.out.print(Text.from_ansi(plots.terminal_plot(curve, min(ui.out.width, 100), 18,
                                                        name)), soft_wrap=True)
    ui.emit(args, result, render)
    if args.plot:
        ui.err.print(f"wrote {args.plot}", markup=False)
    return 0


def cmd_types(args) -> int:
    from .. import catalogue
    rows = catalogue.listing()

    def render(rows):
        table = []
        for r in rows:
            if r["heater"]:
                h = f"{r['heater'][0]:g} V {r['heater'][1]:g} A"
            else:
                h = (f"{r['series'][0]:g} V {r['series'][1]:g} A / "
                     f"{r['parallel'][0]:g} V {r['parallel'][1]:g} A")
            table.append([r["type"], ", ".join(r["aliases"]), r["base"] or "", h,
                          f"{r['section_volts']:g} V {r['section_amps']:g} A",
                          f"{r['controlled_warmup_s']:g} s" if r["controlled_warmup_s"] else "",
                          r["source"]])
        fit(ui.out, [Col("type"), Col("also", wrap=True, priority=2), Col("base", priority=3),
                     Col("heater"), Col("per section", priority=1),
                     Col("warm-up", priority=2), Col("source", wrap=True, priority=4)], table)
    ui.emit(args, rows, render)
    return 0


def register(sub, common) -> None:
    s = sub.add_parser("analyze", parents=[common],
                       help="measure a start-up curve from a CSV file (any instrument)")
    s.add_argument("file", help="CSV with columns time_s,volts,amps[,light]; # comments")
    s.add_argument("--ambient-c", type=number(-40, 80), help="room temperature of the test, C")
    s.add_argument("--type", help="tube type from the catalogue (sets the rating)")
    s.add_argument("--rated-volts", type=number(0, above=True), help="rated heater volts (without --type)")
    s.add_argument("--rated-amps", type=number(0, above=True), help="rated heater amps (without --type)")
    s.add_argument("--plot", metavar="FILE.png", help="also write a matplotlib figure")
    s.add_argument("--no-fit", action="store_true",
                   help="model-free figures only (no thermal model, no predictions)")
    s.set_defaults(func=cmd_analyze)

    s = sub.add_parser("types", parents=[common], help="list the tube catalogue")
    s.set_defaults(func=cmd_types)
