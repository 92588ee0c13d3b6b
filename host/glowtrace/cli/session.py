"""`glowtrace session`: a box of tubes on the bench, one after another."""

import sys

from . import console as ui
from .common import db_path, number
from .tables import Col, fit


def cmd_session(args) -> int:
    from ..procedures import session as ses
    from ..tester.ports import find_tester, find_testers
    from .. import catalogue
    kind = catalogue.load().get(args.type)  # an unknown type stops here
    if args.scan and args.labels:
        raise ses.PatternError("give --labels or --scan, not both")
    pattern = None if args.scan else ses.LabelPattern(args.labels or "T-###", args.start)
    if args.all_testers and args.port:
        raise ses.PatternError("give --port or --all-testers, not both")
    ports = args.port or (find_testers() if args.all_testers else [find_tester()])
    if len(set(ports)) != len(ports):
        raise ses.PatternError("a tester is named twice in --port")
    s = ses.Session(db_path(args), ports, kind.name, args.section, args.range, args.lot,
                    pattern, args.count, args.max_s, args.room_c, unattended=args.yes)

    from .tester import progress_lines
    lines = {str(n): f"tester {n}" if len(ports) > 1 else "capturing"
             for n in range(1, len(ports) + 1)}
    bar, update_for = progress_lines(args.max_s, list(lines.values()), show_tube=True)

    def progress_for(who: str):
        return update_for(lines[who])

    def ask(prompt: str) -> str:
        # the progress lines stop while the user answers: a live display
        # redrawn under the cursor would scatter what they type
        bar.stop()
        try:
            ui.err.print(prompt, end="", markup=False)
            line = sys.stdin.readline()
        finally:
            bar.start()
        if not line:
            raise EOFError
        return line

    def say(text: str) -> None:
        ui.err.print(text, markup=False, highlight=False)

    with bar:
        results = ses.run(s, ask, say, progress_for)
    results = sorted(results, key=lambda r: r.label)  # the box's order, not the finish's
    rows = [{"tube": r.label, "outcome": r.outcome, "status": r.status, "grade": r.grade,
             "figures": r.figures, "note": r.note} for r in results]

    def render(rows):
        fit(ui.out, [Col("tube"), Col("outcome"), Col("status"), Col("grade"),
                     Col("key figures", wrap=True, priority=1),
                     Col("note", wrap=True, priority=2)],
            [[r["tube"], r["outcome"], ui.status_text(r["status"]) if r["status"] else "",
              r["grade"] or "", "  ".join(f"{k} {v}" for k, v in r["figures"].items()),
              r["note"] or ""] for r in rows],
            title=f"Session: {len(rows)} tube(s) of {kind.name}"
            + (f", lot {args.lot}" if args.lot else ""),
            caption="Heater test only: emission, transconductance, shorts between elements, "
                    "gas and noise are not tested. Power tubes stay hot for minutes after a "
                    "capture: handle them with care.")
    ui.emit(args, rows, render)
    return 0


def register(sub, common) -> None:
    s = sub.add_parser("session", parents=[common],
                       help="capture a box of tubes one after another (labels numbered on)",
                       description="A bench session: set the type, sections, range and "
                       "labels once, then insert each tube when asked. A brief cold reading "
                       "before each capture refuses a tube that is still warm, open or "
                       "shorted. Ctrl-C or q ends the session; every finished tube is kept.")
    s.add_argument("--port", action="append",
                   help="serial device or glowsim:// URL; give it again for each tester run "
                        "side by side (default: the one tester found on USB)")
    s.add_argument("--all-testers", action="store_true",
                   help="run every glowtrace tester found on USB side by side")
    s.add_argument("--type", required=True, help="tube type of the box, e.g. 6V6")
    s.add_argument("--section", choices=["A", "B", "AB"],
                   help="sections to switch on (default: every section of the type)")
    s.add_argument("--range", choices=["low", "high"], help="current range (default: from "
                                                            "the type)")
    s.add_argument("--lot", help="the lot (or owner) the tubes go under; made if new")
    s.add_argument("--labels", metavar="PATTERN",
                   help="labels numbered on: a run of # is the number (default T-###)")
    s.add_argument("--start", type=int, default=1, help="first number (default 1)")
    s.add_argument("--scan", action="store_true", help="type or scan each tube's label")
    s.add_argument("--count", type=int, help="stop after this many tubes")
    s.add_argument("--max-s", type=number(1, 300), default=60.0,
                   help="longest capture per tube, s (default 60)")
    s.add_argument("--room-c", type=number(-10, 50), default=22.0,
                   help="room temperature for the cold check, C (default 22)")
    s.add_argument("--yes", action="store_true",
                   help="do not wait for Enter before each tube (a jig, the simulated tester)")
    s.set_defaults(func=cmd_session)
