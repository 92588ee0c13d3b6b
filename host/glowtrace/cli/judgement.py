"""Commands that judge: `history` (one tube), `stock` (every tube, for
dealers) and `report` (a page for the customer)."""


from rich.text import Text

from .. import config, outfile
from ..logbook.store import Store
from . import console as ui
from .common import db_path
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
        rows = stock.stock_rows(scoring.assess_fleet(store, cfg, args.type, args.owner))
    if args.csv:
        stock.write_stock_csv(rows, args.csv)
        ui.err.print(f"wrote {args.csv}", markup=False)

    def render(rows):
        table = [[r["tube"], r["type"] or "", r["owner"] or "", r["grade"] or "-",
                  ui.status_text(r["status"]),
                  " ".join(f"{v:.4g}" for v in r["rated_hot_current_a"].values()) or "-",
                  " ".join(f"{100 * v:+.1f}%" for v in r["current_deviation"].values()) or "-",
                  " ".join(f"{v:.2g}" for v in r["flash_index"].values()) or "-",
                  ui.fmt(r["section_imbalance"], 2)] for r in rows]
        fit(ui.out, [Col("tube"), Col("type", priority=1), Col("owner", priority=3),
                     Col("grade"), Col("status"), Col("hot A at rated V", priority=2),
                     Col("vs rated"), Col("flash", priority=2),
                     Col("imbalance", priority=4)], table,
            caption=f"Grades: {rows[0]['scope']}." if rows else None)
    if args.json or not args.csv:
        ui.emit(args, rows, render)
    return 0


def cmd_report(args) -> int:
    from ..outputs.report import write_report
    cfg = config.load(args.config)
    # a name made from the label stays a plain file name here, whatever the
    # label holds ("KS/0117", "../x")
    path = outfile.check(args.output or f"{outfile.safe_name(args.label)}-heater-report.html",
                         (".html", ".htm"), ".html")
    with Store(db_path(args), create=False) as store:
        result = write_report(store, args.label, cfg, path)
    ui.emit(args, {"report": str(path), "status": result["status"], "grade": result["grade"]},
            lambda r: ui.out.print(f"Wrote {r['report']} (status {r['status']}).", markup=False))
    return 0


def register(sub, common) -> None:
    s = sub.add_parser("history", parents=[common],
                       help="a tube's captures, trends and assessment")
    s.add_argument("label")
    s.add_argument("--config", help="scoring settings TOML (default: yours, else built-in)")
    s.set_defaults(func=cmd_history)

    s = sub.add_parser("stock", parents=[common],
                       help="every tube with grade and key figures (dealers)")
    s.add_argument("--csv", metavar="FILE", help="write the list as CSV")
    s.add_argument("--type")
    s.add_argument("--owner")
    s.add_argument("--config", help="scoring settings TOML")
    s.set_defaults(func=cmd_stock)

    s = sub.add_parser("report", parents=[common], help="an HTML report of one tube")
    s.add_argument("label")
    s.add_argument("-o", "--output", metavar="FILE.html")
    s.add_argument("--config", help="scoring settings TOML")
    s.set_defaults(func=cmd_report)
