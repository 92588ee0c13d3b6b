"""Commands that judge: `history` (one tube), `stock` (every tube, for
dealers) and `report` (a page for the customer)."""


from rich.text import Text

from .. import config, outfile
from ..logbook.store import Store
from . import console as ui
from .common import db_path, number
from .tables import Col, fit, hanging

# history's figure columns: analysis key, header, significant digits, priority
HISTORY_FIGURES = [("cold_resistance_20c_ohm", "R20", 4, 0),
                   ("rated_hot_current_a", "I hot", 4, 0),
                   ("rated_inrush_ratio", "inr.", 3, 1), ("rated_warmup_90_s", "w90 s", 3, 1),
                   ("rated_settle_1pct_s", "set. s", 3, 2), ("series_warmup_s", "ser. s", 3, 2),
                   ("flash_index", "flash", 2, 0)]


def cmd_history(args) -> int:
    from ..judgement import scoring
    cfg = config.load(args.config)
    with Store(db_path(args), create=False) as store:
        result = scoring.history(store, args.label, cfg)
    ui.emit(args, result, lambda r: render_history(r, cfg["noise_floor"]))
    return 0


def render_history(r: dict, noise_floor: dict) -> None:
    reasons: list[str] = []   # why captures were left out, numbered once each
    rows = []
    for c in r["captures"]:
        if c["scored"]:
            scored = Text("yes")
        else:
            why = c["excluded"] or "not scored"
            if why not in reasons:
                reasons.append(why)
            scored = Text(f"no ({reasons.index(why) + 1})", style=ui.WARN)
        rows.append([c["at"][:10], c["section"],
                     *[ui.fmt(c.get(k), d) for k, _, d, _ in HISTORY_FIGURES],
                     ui.fmt(c.get("ambient_c"), 3), ui.fmt(c.get("cold_start_ok"), 0), scored])
    cols = [Col("date"), Col("s"),
            *[Col(h, justify="right", priority=p) for _, h, _, p in HISTORY_FIGURES],
            Col("room C", justify="right", priority=3), Col("cold", priority=3),
            Col("scored")]
    title = f"{r['tube']} ({r['type'] or 'type unknown'})" + (
        f", owner {r['owner']}" if r["owner"] else "")
    fit(ui.out, cols, rows, title=title,
        caption="s section, R20 cold resistance at 20 C (ohm); at rated voltage from a "
                "stiff supply: I hot hot current (A), inr. inrush ratio (rated volts / R20 "
                "over I hot), w90 warm-up to 90 %, set. hot-current settling to 1 %; ser. "
                "series-string warm-up to 80 %; flash flash index")
    hanging(ui.out, [f"({n}) {why}" for n, why in enumerate(reasons, 1)], bullet="  ")
    from ..outputs.plots import trend_charts
    for chart in trend_charts(r, noise_floor, width=min(ui.out.width, 72)):
        ui.out.print(Text.from_ansi(chart), soft_wrap=True)
    line = Text("Status: ")
    line.append_text(ui.status_text(r["status"], bold=True))
    if r["grade"]:
        line.append("   grade: ")
        line.append(r["grade"], style="bold")
    ui.out.print(line)
    hanging(ui.out, r["reasons"])
    if r["grade"]:
        hanging(ui.out, [Text(f"Grade and status: {r['scope']}.", style="dim")], bullet="    ")


def cmd_stock(args) -> int:
    from ..judgement import scoring
    from ..outputs import stock
    cfg = config.load(args.config)
    if args.csv:  # checked before the work, not after
        args.csv = str(outfile.check(args.csv, (".csv",), ".csv"))
    with Store(db_path(args), create=False) as store:
        rows = stock.stock_rows(scoring.assess_fleet(store, cfg, args.type,
                                                     args.owner or args.lot))
    rows = stock.select(rows, grade=args.grade, status=args.status, sort=args.sort)
    if args.csv:
        stock.write_stock_csv(rows, args.csv)
        ui.err.print(f"wrote {args.csv}", markup=False)

    def per_section(d: dict, form) -> str:
        # sections named: "A 0.150 B 0.152", not two bare numbers
        return " ".join(f"{s} {form(v)}" for s, v in d.items()) or "-"

    def render(rows):
        if not rows:
            ui.out.print("No tubes match.", markup=False)
            return
        table = [[r["tube"], r["type"] or "", r["owner"] or "", r["grade"] or "-",
                  ui.status_text(r["status"]),
                  per_section(r["rated_hot_current_a"], lambda v: f"{v:.4g}"),
                  per_section(r["current_deviation"], lambda v: f"{100 * v:+.1f}"),
                  per_section(r["flash_index"], lambda v: f"{v:.2g}"),
                  ui.fmt(r["section_imbalance"], 2)] for r in rows]
        fit(ui.out, [Col("tube"), Col("type", priority=1), Col("owner/lot", priority=3),
                     Col("grade"), Col("status"), Col("hot current at rated V, A", priority=2),
                     Col("vs rated %"), Col("flash index", priority=2),
                     Col("imbalance %", priority=4)], table,
            title=f"Stock, {len(rows)} tube(s): {rows[0]['scope']}",
            caption="Per section (A, B). vs rated: hot current against the type's rating. "
                    "Reasons per tube: `glowtrace history LABEL` or --json.")
    if args.json or not args.csv:
        ui.emit(args, rows, render)
    return 0


def cmd_match(args) -> int:
    from .. import catalogue
    from ..errors import GlowtraceError
    from ..judgement import matching, scoring
    cfg = config.load(args.config)
    type_name = catalogue.load().get(args.type).name
    kind = matching.FIGURES[args.by][3]
    tol = (matching.DEFAULT_TOLERANCE[args.by] if args.tolerance is None
           else args.tolerance / 100 if kind == "relative" else args.tolerance)
    with Store(db_path(args), create=False) as store:
        owner = args.owner or args.lot
        tubes = scoring.assess_fleet(store, cfg, type_name, owner)
    if not tubes:
        raise GlowtraceError(f"no tubes of type {type_name} in the logbook"
                             + (f" for {owner!r}" if owner else ""))
    values, missing = matching.tube_figures(tubes, args.by)
    sets, left = matching.best_sets(values, args.size, tol, kind)
    key, words, unit, _ = matching.FIGURES[args.by]
    result = {"type": type_name, "by": key, "size": args.size, "tolerance": tol,
              "tolerance_kind": kind, "method": "optimal: dynamic programming over the "
              "sorted figure (most sets, then least total spread)",
              "sets": [{"tubes": s.tubes, "values": s.values, "spread": s.spread,
                        "relative_spread": s.relative} for s in sets],
              "left_over": left, "without_figure": missing, "scope": matching.SCOPE}

    def render(r):
        tol_text = f"{100 * tol:g} %" if kind == "relative" else f"{tol:g} {unit}".strip()
        rows = [[str(n), " ".join(s["tubes"]),
                 " ".join(f"{v:.4g}" for v in s["values"]),
                 f"{s['spread']:.3g}", f"{100 * s['relative_spread']:.2f} %"]
                for n, s in enumerate(r["sets"], 1)]
        fit(ui.out, [Col("set", justify="right"), Col("tubes"), Col(f"{words} ({unit})".replace(" ()", "")),
                     Col("spread", justify="right"), Col("of lowest", justify="right", priority=1)],
            rows, title=f"{type_name}: sets of {args.size} within {tol_text}",
            caption=f"{len(r['sets'])} set(s); {r['method']}. Scope: {r['scope']}.")
        if r["left_over"]:
            ui.out.print("Left over: " + ", ".join(r["left_over"]), markup=False)
        if r["without_figure"]:
            ui.out.print("No figure yet (no analysed capture): " + ", ".join(r["without_figure"]),
                         markup=False)
    ui.emit(args, result, render)
    return 0


def cmd_labels(args) -> int:
    from ..errors import GlowtraceError
    from ..outputs import labels
    cfg = config.load(args.config)
    path = outfile.check(args.output, (".pdf", ".svg"), ".pdf")
    if args.grid_mm:
        try:
            grid = labels.parse_grid_mm(args.grid_mm)
        except ValueError as e:
            raise GlowtraceError(str(e)) from None
    else:
        grid = labels.GRIDS[args.grid or ("2x5" if args.paper == "letter" else "3x8")]
    with Store(db_path(args), create=False) as store:
        items = labels.label_items(store, cfg, args.tube, args.owner or args.lot, args.type)
    if not items:
        raise GlowtraceError("no tubes to label: the logbook has none of those")
    try:
        pages = labels.write_sheet(items, path, args.paper, grid)
    except ValueError as e:
        raise GlowtraceError(str(e)) from None
    ui.emit(args, {"labels": len(items), "pages": pages, "file": str(path)},
            lambda r: ui.out.print(f"Wrote {r['labels']} label(s) on {r['pages']} sheet(s) to "
                                   f"{r['file']}. Print at 100 % (no fit-to-page) to keep "
                                   "the grid.", markup=False))
    return 0


def cmd_report(args) -> int:
    from ..outputs.report import shop_settings, write_report
    cfg = config.load(args.config)
    shop = shop_settings(args.shop)  # a bad settings file stops before the work
    if args.visit:
        from datetime import date
        try:
            date.fromisoformat(args.visit)
        except ValueError:
            from ..errors import GlowtraceError
            raise GlowtraceError(f"--visit {args.visit!r}: a day as YYYY-MM-DD") from None
    # a name made from the label stays a plain file name here, whatever the
    # label holds ("KS/0117", "../x")
    path = outfile.check(args.output or f"{outfile.safe_name(args.label)}-heater-report.html",
                         (".html", ".htm"), ".html")
    with Store(db_path(args), create=False) as store:
        result = write_report(store, args.label, cfg, path, shop, args.visit, args.paper)
    if not shop and not args.json:
        ui.err.print("No shop details on the page: put name, address and contact under [shop] "
                     "in ~/.config/glowtrace/shop.toml (or --shop FILE).", markup=False)
    out = {"report": str(path), **result}
    if result["kind"] == "tube":  # one tube: its status and grade at the top level as before
        out.update(status=result["tubes"][0]["status"], grade=result["tubes"][0]["grade"])

    def render(r):
        ui.out.print(f"Wrote {r['report']}: {len(r['tubes'])} tube(s)"
                     + (f", visit {r['visit']}" if r["visit"] else "") + ".", markup=False)
        for t in r["tubes"]:
            ui.out.print(f"  {t['tube']}: {t['verdict']}. {t['advice']}", markup=False,
                         highlight=False)
    ui.emit(args, out, render)
    return 0


def _owner_or_lot(s) -> None:
    """--owner and --lot: the same filter (a lot is kept as an owner), any case."""
    s.add_argument("--owner", help="only this owner's tubes (any case)")
    s.add_argument("--lot", help="only this lot's tubes (any case; a lot is kept as an owner)")


def register(sub, common) -> None:
    s = sub.add_parser("history", parents=[common],
                       help="a tube's captures, trends and assessment")
    s.add_argument("label")
    s.add_argument("--config", help="scoring settings TOML (default: yours, else built-in)")
    s.set_defaults(func=cmd_history)

    s = sub.add_parser("stock", parents=[common],
                       help="every tube with grade and key figures (dealers)")
    s.add_argument("--csv", metavar="FILE", help="write the list as CSV")
    s.add_argument("--type", help="only this type")
    _owner_or_lot(s)
    s.add_argument("--grade", help="only this grade")
    s.add_argument("--status", help="only this status, e.g. 'at limit'")
    s.add_argument("--sort", choices=["tube", "type", "grade", "status", "current"],
                   default="tube", help="order of the rows (default tube)")
    s.add_argument("--config", help="scoring settings TOML")
    s.set_defaults(func=cmd_stock)

    from ..judgement.matching import FIGURES
    s = sub.add_parser("match", parents=[common],
                       help="matched pairs, trios or quads of one type by a heater figure",
                       description="Groups tubes of one type into sets whose heater figure "
                       "at rated voltage lies closest: the most sets within the tolerance, "
                       "then the least spread (optimal, not greedy). Heater matching only: "
                       "not the plate-current or transconductance matching of amplifiers.")
    s.add_argument("type", help="tube type, e.g. 6V6")
    s.add_argument("--size", type=int, choices=(2, 3, 4), default=2,
                   help="tubes per set: 2 pairs, 3 trios, 4 quads (default 2)")
    s.add_argument("--by", choices=list(FIGURES), default="current",
                   help="figure to match: current (hot current), warmup (to 90 %%), "
                        "flash (flash index); default current")
    s.add_argument("--tolerance", type=number(0),
                   help="largest spread in a set: per cent above its lowest value for "
                        "current and warmup (default 2 and 5), flash index units for flash "
                        "(default 0.02)")
    _owner_or_lot(s)
    s.add_argument("--config", help="scoring settings TOML")
    s.set_defaults(func=cmd_match)

    from ..outputs.labels import GRIDS, PAPERS
    s = sub.add_parser("labels", parents=[common],
                       help="a printable sheet of tube labels with QR codes (PDF or SVG)")
    s.add_argument("tube", nargs="*", help="labels of the tubes (default: all chosen)")
    s.add_argument("-o", "--output", required=True, metavar="FILE.pdf|FILE.svg")
    _owner_or_lot(s)
    s.add_argument("--type", help="only this type")
    s.add_argument("--paper", choices=list(PAPERS), default="A4", help="paper (default A4)")
    s.add_argument("--grid", choices=list(GRIDS),
                   help="label sheet: 3x8 (70 x 36 mm, A4; the A4 default), 3x7 (63.5 x 38.1 "
                        "mm, A4), 2x5 (4 x 2 in, letter; the letter default)")
    s.add_argument("--grid-mm", metavar="C,R,W,H,LEFT,TOP[,HGAP,VGAP]",
                   help="your own sheet: columns, rows, label width and height, left and top "
                        "margins and gaps, in mm")
    s.add_argument("--config", help="scoring settings TOML")
    s.set_defaults(func=cmd_labels)

    s = sub.add_parser("report", parents=[common],
                       help="an HTML report for the customer: one tube, or an owner's visit",
                       description="A page to hand to the customer: the shop (from [shop] in "
                       "~/.config/glowtrace/shop.toml or --shop), the customer and the visit, "
                       "per tube a verdict in plain words, then figures and curves, the "
                       "statistics in an appendix. Prints on A4 or Letter.")
    s.add_argument("label", help="a tube's label, or an owner or lot (any case)")
    s.add_argument("-o", "--output", metavar="FILE.html")
    s.add_argument("--visit", metavar="YYYY-MM-DD",
                   help="for an owner: the tubes tested that day (default: the latest visit)")
    s.add_argument("--shop", metavar="FILE", help="shop settings TOML with a [shop] table")
    s.add_argument("--paper", choices=["A4", "letter"], default="A4",
                   help="paper for printing (default A4)")
    s.add_argument("--config", help="scoring settings TOML")
    s.set_defaults(func=cmd_report)
