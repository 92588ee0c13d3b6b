"""`glowtrace demo`: the invented shop's morning on the simulated tester."""

import time
from pathlib import Path

from rich.text import Text

from .. import paths
from . import console as ui
from .tables import Col, fit


def cmd_demo(args) -> int:
    from ..procedures.demo import SHOP, run_demo
    db = Path(args.db) if args.db else paths.default_db_path().with_name("demo.db")
    if not args.json:
        ui.out.print(Text.assemble((SHOP, "bold"), ": earlier visits, then this morning at "
                                   "the bench, on the simulated tester (real firmware under "
                                   "micropython)."))

    def progress(n, total, t, when):
        if t is None:
            ui.err.print("  calibrating the tester: socket empty, then a 4.7 ohm reference")
            return
        day = f"visit of {when[:10]}" if when else "today"
        ui.err.print(f"  [{n}/{total}] {t.label} {t.tube_type} section {t.section}, {day}: "
                     "captured and stored",
                     markup=False, highlight=False)
    t0 = time.monotonic()
    res = run_demo(db, progress)
    elapsed = time.monotonic() - t0

    ui.emit(args, dict(res, database=str(db), seconds=round(elapsed, 2)),
            lambda r: render_demo(r, db, elapsed))
    return 0


def render_demo(res: dict, db, elapsed: float) -> None:
    """Today's captures, then the logbook's judgement of every tube."""
    rows = []
    for r in res["captures"]:
        for sec in r["section"]:
            a = r.get("analysis", {}).get(sec, {})
            flash = a.get("flash_index")
            rows.append([r["tube"], r["type"], r["customer"], sec,
                         f"{r[f'peak_a_{sec}']:.3f}", ui.fixed(r[f"final_a_{sec}"], 3),
                         ui.fmt(a.get("rated_inrush_ratio"), 3) + "x",
                         ui.fmt(a.get("warmup_90_s"), 3) + " s",
                         Text(ui.fmt(flash, 2), style=ui.BAD if flash and flash > 0.02
                              else ""),
                         f"{r['stored_bytes'] / 1000:.1f}"])
    fit(ui.out, [Col("tube"), Col("type", priority=1), Col("owner", priority=3),
                 Col("sect."), Col("peak A", justify="right", priority=2),
                 Col("hot A", justify="right"), Col("inrush", justify="right", priority=2),
                 Col("warm-up 90 %", justify="right", priority=1),
                 Col("flash index", justify="right"),
                 Col("kB", justify="right", priority=4)], rows,
        title=f"Today's captures, stored in {db}")
    fit(ui.out, [Col("tube"), Col("owner", priority=1), Col("status"),
                 Col("grade"), Col("why", wrap=True)],
        [[a["tube"], a["owner"] or "", ui.status_text(a["status"]), a["grade"] or "-",
          a["reasons"][0]] for a in res["tubes"]], title="The logbook's judgement")
    example = next((a["tube"] for a in res["tubes"] if a["status"] != "steady"),
                   res["tubes"][0]["tube"])
    ui.out.print(f"{len(res['captures'])} captures today and the earlier visits in "
                 f"{elapsed:.1f} s. Try: glowtrace history {example} --db {db}",
                 markup=False, highlight=False)


def register(sub, common) -> None:
    s = sub.add_parser("demo", parents=[common],
                       help="capture an invented shop's tubes on the simulated tester")
    s.set_defaults(func=cmd_demo)
