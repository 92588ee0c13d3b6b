"""Commands on stored captures: `list`, `show`, `reanalyze` and `recover`."""

from pathlib import Path

from rich.progress import BarColumn, Progress, TextColumn
from rich.text import Text

from .. import outfile
from . import console as ui
from .common import db_path, number
from .figures import capture_summary
from .tables import Col, fit, hanging


def cmd_list(args) -> int:
    from ..logbook.store import Store
    with Store(db_path(args), create=False) as store:
        rows = store.list_captures(args.tube)

    def render(rows):
        if not rows:
            ui.out.print("No captures stored.")
            return
        table = []
        for r in rows:
            end = r["end_reason"] or "-"
            if r["trip_cause"]:
                end += f" ({r['trip_cause']})"
            if not r["complete"]:
                end = Text(f"incomplete: {r['incomplete_reason']}", style=ui.WARN)
            table.append([r["uuid"][:8], r["tube"], r["type"] or "", r["section"],
                          r["started_at"][:19].replace("T", " "), end, str(r["n_sets"]),
                          f"{(r['sample_bytes'] or 0) / 1000:.1f}"])
        fit(ui.out, [Col("capture"), Col("tube"), Col("type", priority=2), Col("section"),
                     Col("started (UTC)"), Col("end", wrap=True, priority=1),
                     Col("sets", justify="right", priority=3),
                     Col("kB", justify="right", priority=3)], table)
    ui.emit(args, rows, render)
    return 0


def cmd_show(args) -> int:
    from ..analysis.curve import stored_curves
    from ..logbook.store import Store
    from ..outputs.captures import stored_summary
    if args.plot:  # checked before the work, not after
        args.plot = str(outfile.check(args.plot, outfile.FIGURE, ".png"))
    with Store(db_path(args), create=False) as store:
        uuid = store.find_uuid(args.uuid)
        s, analysis = stored_summary(store, uuid)
        curves = stored_curves(store, uuid) if args.plot else {}
    figures = (analysis or {}).get("sections", {})
    if args.json:
        s["analysis"] = analysis
    ui.emit(args, s, lambda s: capture_summary(s, details=True, figures=figures))
    if curves:
        from ..outputs import plots
        for sec, c in curves.items():
            path = plot_path(args.plot, sec, len(curves) > 1)
            plots.figure(c, figures.get(sec, {}), path, f"{s['tube']} section {sec}")
            ui.err.print(f"wrote {path}", markup=False)
    return 0


def plot_path(path: str, section: str, several: bool) -> Path:
    p = Path(path)
    return p.with_name(f"{p.stem}-{section}{p.suffix}") if several else p


def cmd_reanalyze(args) -> int:
    from ..analysis import ANALYSIS_VERSION
    from ..analysis.runner import analyze_stored, reanalyze
    from ..logbook.store import Store
    with Store(db_path(args), create=False) as store:
        if args.uuid:
            done = [store.find_uuid(u) for u in args.uuid]
            failed = {}
            for u in done:
                reason = analyze_stored(store, u).get("not_analysed")
                if reason:
                    failed[u] = reason
        else:
            bar = Progress(TextColumn("analysing"), BarColumn(),
                           TextColumn("{task.completed}/{task.total}"),
                           console=ui.err, transient=True, disable=not ui.err.is_terminal)
            with bar:
                task = bar.add_task("", total=None)
                done, failed = reanalyze(
                    store, args.force,
                    lambda n, total: bar.update(task, completed=n, total=total))
    res = {"analysis_version": ANALYSIS_VERSION, "analysed": len(done), "captures": done,
           "not_analysed": failed}

    def render(r):
        ui.out.print(f"Analysed {r['analysed']} capture(s) with analysis version "
                     f"{r['analysis_version']}.", markup=False)
        if failed:  # the rest went on past them; each keeps its reason
            ui.warn(f"{len(failed)} capture(s) could not be analysed (stored with the "
                    "reason, left out of scoring):")
            hanging(ui.err, [f"{u}: {why}" for u, why in failed.items()])
    ui.emit(args, res, render)
    return 0


def cmd_recover(args) -> int:
    from ..procedures.capture import recover_into_logbook
    done = recover_into_logbook(
        db_path(args), args.file, args.busy_wait_s,
        lambda waited: ui.err.print("The logbook is busy: waiting...", markup=False)
        if waited < 1 else None)

    def render(rows):
        for r in rows:
            state = "stored" if r["stored"] else "already in the logbook"
            ui.out.print(f"{r['file']}: capture {r['capture']} of {r['tube']} {state}; "
                         "file removed.", markup=False, highlight=False)
    ui.emit(args, done, render)
    return 0


def register(sub, common) -> None:
    s = sub.add_parser("list", parents=[common], help="list stored captures")
    s.add_argument("--tube", help="only this tube")
    s.set_defaults(func=cmd_list)

    s = sub.add_parser("show", parents=[common], help="show one stored capture")
    s.add_argument("uuid", help="capture UUID (a unique prefix will do)")
    s.add_argument("--plot", metavar="FILE.png", help="write the curve as a figure")
    s.set_defaults(func=cmd_show)

    s = sub.add_parser("reanalyze", parents=[common],
                       help="re-run the current analysis on stored captures")
    s.add_argument("uuid", nargs="*", help="only these captures (default: every one "
                                           "without the current analysis)")
    s.add_argument("--force", action="store_true", help="all captures, even if current")
    s.set_defaults(func=cmd_reanalyze)

    s = sub.add_parser("recover", parents=[common],
                       help="store captures the logbook could not take when they were made",
                       description="Store captures kept in unsaved-capture files (written "
                                   "when the logbook was locked, read-only or full), analyse "
                                   "them, and remove each file once its capture is stored.")
    s.add_argument("file", nargs="+", help="unsaved-capture file(s) named by `capture`")
    s.add_argument("--busy-wait-s", type=number(0, 86400), default=60.0,
                   help="how long to wait for a busy logbook (default 60)")
    s.set_defaults(func=cmd_recover)
