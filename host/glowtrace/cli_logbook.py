"""Logbook commands: owners, tubes, imports, history, stock list, reports,
export and merge. Each parses its options, calls one library function and
prints the result (JSON with --json)."""

import sys
from pathlib import Path

from rich.table import Table

from . import config, records
from .cli_common import _db, _emit, _fmt, err, out
from .errors import GlowtraceError
from .store import Store


def _confirm(args, what: str, token: str) -> None:
    """Deleting needs --yes, or the name typed back at a terminal."""
    if args.yes:
        return
    if not sys.stdin.isatty():
        raise GlowtraceError(f"deleting {what} needs confirmation: add --yes")
    answer = input(f"This deletes {what}. Type {token!r} to confirm: ")
    if answer.strip() != token:
        raise GlowtraceError("not confirmed: nothing deleted")


# owners -------------------------------------------------------------------
def cmd_owner(args) -> int:
    with Store(_db(args)) as store:
        if args.action == "add":
            res = records.add_owner(store, args.name, args.contact, args.notes)
        elif args.action == "list":
            res = records.list_owners(store)
        elif args.action == "rename":
            records.rename_owner(store, args.name, args.new_name)
            res = {"renamed": args.name, "to": args.new_name}
        else:
            records.require_owner(store, args.name)
            _confirm(args, f"owner {args.name!r}", args.name)
            records.delete_owner(store, args.name)
            res = {"deleted": args.name}

    def render(r):
        if isinstance(r, list):
            t = Table("owner", "contact", "tubes", "notes")
            for o in r:
                t.add_row(o["name"], o["contact"] or "", str(o["tubes"]), o["notes"] or "")
            out.print(t)
        else:
            out.print(", ".join(f"{k}: {v}" for k, v in r.items() if v is not None))
    _emit(args, res, render)
    return 0


# tubes --------------------------------------------------------------------
def cmd_tube(args) -> int:
    with Store(_db(args)) as store:
        a = args.action
        if a == "add":
            res = records.add_tube(store, args.label, args.type, args.owner, args.notes)
        elif a == "list":
            res = records.list_tubes(store, args.owner, args.type)
        elif a == "show":
            res = records.require_tube(store, args.label)
            res["captures"] = store.list_captures(args.label)
        elif a == "rename":
            records.rename_tube(store, args.label, args.new_label)
            res = {"renamed": args.label, "to": args.new_label}
        elif a == "move":
            if bool(args.owner) == bool(args.no_owner):
                raise GlowtraceError("give --owner NAME or --no-owner")
            records.move_tube(store, args.label, None if args.no_owner else args.owner)
            res = records.require_tube(store, args.label)
        elif a == "note":
            res = records.update_tube(store, args.label, notes=args.text)
        elif a == "baseline":
            res = set_baseline(store, args)
        else:
            t = records.require_tube(store, args.label)
            n = store.db.execute("SELECT count(*) FROM captures WHERE tube = ?",
                                 [t["label"]]).fetchone()[0]
            _confirm(args, f"tube {args.label!r} and its {n} capture(s)", args.label)
            res = {"deleted": args.label, "captures_deleted": records.delete_tube(store, args.label)}

    def render(r):
        if isinstance(r, list):
            t = Table("tube", "type", "owner", "captures", "last capture (UTC)", "notes")
            for x in r:
                t.add_row(x["label"], x["type"] or "", x["owner"] or "", str(x["captures"]),
                          (x["last_capture"] or "")[:16], x["notes"] or "")
            out.print(t)
        elif "captures" in r and isinstance(r["captures"], list):
            out.print(f"[bold]{r['label']}[/]  {r['type'] or 'type unknown'}  owner: "
                      f"{r['owner'] or '-'}  sections: {', '.join(r['sections'])}")
            if r["notes"]:
                out.print(r["notes"])
            out.print(f"{len(r['captures'])} capture(s); `glowtrace history {r['label']}` "
                      "for the assessment")
        else:
            out.print(", ".join(f"{k}: {v}" for k, v in r.items() if v is not None))
    _emit(args, res, render)
    return 0


def set_baseline(store: Store, args) -> dict:
    import json
    from datetime import datetime, timezone
    t = records.require_tube(store, args.label)
    if args.section not in t["sections"]:
        raise GlowtraceError(f"{t['label']} has section(s) {', '.join(t['sections'])}")
    if args.clear:
        with store.transaction() as conn:
            conn.execute("DELETE FROM baselines WHERE tube = ? AND section = ?",
                         [t["label"], args.section])
        return {"tube": t["label"], "section": args.section, "baseline": "first good captures"}
    if not args.captures:
        raise GlowtraceError("give --captures UUID... or --clear")
    uuids = []
    for u in args.captures:
        full = store.find_uuid(u)
        row = store.db.execute("SELECT tube, section FROM captures WHERE uuid = ?",
                               [full]).fetchone()
        if row[0] != t["label"] or args.section not in row[1]:
            raise GlowtraceError(f"capture {u} is not of {t['label']} section {args.section}")
        uuids.append(full)
    with store.transaction() as conn:
        conn.execute("DELETE FROM baselines WHERE tube = ? AND section = ?",
                     [t["label"], args.section])
        conn.execute("INSERT INTO baselines (tube, section, captures, set_at) VALUES (?,?,?,?)",
                     [t["label"], args.section, json.dumps(uuids),
                      datetime.now(timezone.utc).isoformat(timespec="seconds")])
    return {"tube": t["label"], "section": args.section, "baseline": uuids}


# import -------------------------------------------------------------------
def cmd_import(args) -> int:
    from .importer import import_curve
    with Store(_db(args)) as store:
        uuid, analysis, warnings = import_curve(store, args.file, args.tube, args.type,
                                                args.section, args.at, args.ambient_c)
    m = analysis["sections"][args.section]
    res = {"uuid": uuid, "tube": args.tube, "section": args.section, "analysis": m,
           "warnings": warnings + m.get("warnings", [])}
    _emit(args, res, lambda r: (
        out.print(f"Stored {r['uuid']} for {r['tube']} section {r['section']}: cold start "
                  f"{_fmt(m.get('cold_start_ok'), 0)}, flash index {_fmt(m.get('flash_index'), 3)}"),
        [err.print(f"[yellow]{w}[/]") for w in r["warnings"]]))
    return 0


# history ------------------------------------------------------------------
METRIC_COLS = [("cold_resistance_20c_ohm", "R20", 4), ("hot_current_a", "I hot", 4),
               ("inrush_ratio", "inr.", 3), ("warmup_90_s", "w90 s", 3),
               ("settle_1pct_s", "set. s", 3), ("flash_index", "flash", 2)]


def cmd_history(args) -> int:
    from . import scoring
    cfg = config.load(args.config)
    with Store(_db(args), create=False) as store:
        result = scoring.history(store, args.label, cfg)
    _emit(args, result, render_history)
    return 0


def render_history(r: dict) -> None:
    t = Table("date", "s", *[c[1] for c in METRIC_COLS], "room C", "cold",
              "scored", title=f"{r['tube']} ({r['type'] or 'type unknown'})"
              + (f", owner {r['owner']}" if r["owner"] else ""),
              caption="R20 cold resistance at 20 C (ohm), I hot (A), inr. inrush ratio, "
                      "w90 warm-up to 90 %, set. settling 1 %")
    for c in r["captures"]:
        t.add_row(c["at"][:10], c["section"],
                  *[_fmt(c.get(k), d) for k, _, d in METRIC_COLS], _fmt(c.get("ambient_c"), 3),
                  _fmt(c.get("cold_start_ok"), 0),
                  "yes" if c["scored"] else f"[yellow]{(c['excluded'] or 'no')[:30]}[/]")
    out.print(t)
    plots = trend_plots(r)
    if plots:
        print(plots)
    colour = {"steady": "green", "new": "cyan", "watch": "yellow", "drifting": "red",
              "at limit": "red", "heater fault": "red"}[r["status"]]
    out.print(f"Status: [bold {colour}]{r['status']}[/]"
              + (f"   grade: [bold]{r['grade']}[/]" if r["grade"] else ""))
    for reason in r["reasons"]:
        out.print(f"  - {reason}")


def trend_plots(r: dict, width: int = 60, height: int = 9) -> str:
    """Small terminal plots of the metrics that have at least two points."""
    import plotext as plt

    from .scoring import LABELS, _parse_at
    blocks = []
    for m, (label, unit) in LABELS.items():
        series = {}
        for c in r["captures"]:
            if c["scored"] and c.get(m) is not None:
                series.setdefault(c["section"], []).append((c["at"], c[m]))
        if not any(len(v) >= 2 for v in series.values()):
            continue
        plt.clear_figure()
        plt.plotsize(width, height)
        plt.theme("clear")
        t0 = min(_parse_at(a) for v in series.values() for a, _ in v)
        for sec, pts in sorted(series.items()):
            days = [(_parse_at(a) - t0).total_seconds() / 86400 for a, _ in pts]
            plt.plot(days, [y for _, y in pts], label=f"section {sec}", marker="dot")
        plt.title(f"{label} ({unit})" if unit else label)
        plt.xlabel("days since first capture")
        blocks.append(plt.build())
    return "\n".join(blocks)


# stock list ---------------------------------------------------------------
def cmd_stock(args) -> int:
    from . import exchange, scoring
    cfg = config.load(args.config)
    with Store(_db(args), create=False) as store:
        rows = exchange.stock_rows(scoring.assess_fleet(store, cfg, args.type, args.owner))
    if args.csv:
        exchange.write_stock_csv(rows, args.csv)
        err.print(f"wrote {args.csv}")

    def render(rows):
        t = Table("tube", "type", "owner", "grade", "status", "hot A", "vs rated",
                  "flash", "imbalance")
        for r in rows:
            t.add_row(r["tube"], r["type"] or "", r["owner"] or "", r["grade"] or "-",
                      r["status"],
                      " ".join(f"{v:.4g}" for v in r["hot_current_a"].values()) or "-",
                      " ".join(f"{100 * v:+.1f}%" for v in r["current_deviation"].values()) or "-",
                      " ".join(f"{v:.2g}" for v in r["flash_index"].values()) or "-",
                      _fmt(r["section_imbalance"], 2))
        out.print(t)
    if args.json or not args.csv:
        _emit(args, rows, render)
    return 0


# report, export, merge ----------------------------------------------------
def cmd_report(args) -> int:
    from .report import write_report
    cfg = config.load(args.config)
    path = Path(args.output or f"{args.label}-heater-report.html")
    with Store(_db(args), create=False) as store:
        result = write_report(store, args.label, cfg, path)
    _emit(args, {"report": str(path), "status": result["status"], "grade": result["grade"]},
          lambda r: out.print(f"Wrote {r['report']} (status {r['status']})."))
    return 0


def cmd_export(args) -> int:
    from .exchange import export_db
    with Store(_db(args), create=False) as store:
        size = export_db(store, args.file)
    _emit(args, {"file": args.file, "bytes": size},
          lambda r: out.print(f"Exported the logbook to {r['file']} ({r['bytes']:,} bytes)."))
    return 0


def cmd_merge(args) -> int:
    from .exchange import merge_db
    with Store(_db(args)) as store:
        res = merge_db(store, args.file)

    def render(r):
        out.print("Merged: " + ", ".join(f"{n} {t}" for t, n in r["added"].items() if n)
                  if any(r["added"].values()) else "Nothing new to merge.")
        for c in r["conflicts"]:
            err.print(f"[yellow]tube {c['tube']}: here {c['here']}, there {c['there']} "
                      "(kept as here)[/]")
    _emit(args, res, render)
    return 0


# parser -------------------------------------------------------------------
def register(sub, common) -> None:
    s = sub.add_parser("owner", parents=[common], help="customers who own tubes")
    osub = s.add_subparsers(dest="action", required=True, metavar="ACTION")
    o = osub.add_parser("add", parents=[common], help="add an owner")
    o.add_argument("name")
    o.add_argument("--contact")
    o.add_argument("--notes")
    osub.add_parser("list", parents=[common], help="list owners")
    o = osub.add_parser("rename", parents=[common], help="rename an owner")
    o.add_argument("name")
    o.add_argument("new_name")
    o = osub.add_parser("delete", parents=[common], help="delete an owner without tubes")
    o.add_argument("name")
    o.add_argument("--yes", action="store_true", help="do not ask for confirmation")
    s.set_defaults(func=cmd_owner)

    s = sub.add_parser("tube", parents=[common], help="tubes: add, list, show, rename, move")
    tsub = s.add_subparsers(dest="action", required=True, metavar="ACTION")
    t = tsub.add_parser("add", parents=[common], help="record a tube")
    t.add_argument("label", help="your label for it (what is written on the tube or box)")
    t.add_argument("--type", required=True, help="tube type, e.g. 12AX7")
    t.add_argument("--owner", help="its owner (see `glowtrace owner add`)")
    t.add_argument("--notes")
    t = tsub.add_parser("list", parents=[common], help="list tubes")
    t.add_argument("--owner")
    t.add_argument("--type")
    t = tsub.add_parser("show", parents=[common], help="one tube's record")
    t.add_argument("label")
    t = tsub.add_parser("rename", parents=[common], help="change a tube's label")
    t.add_argument("label")
    t.add_argument("new_label")
    t = tsub.add_parser("move", parents=[common], help="give a tube to another owner")
    t.add_argument("label")
    t.add_argument("--owner")
    t.add_argument("--no-owner", action="store_true", help="the tube has no owner now")
    t = tsub.add_parser("note", parents=[common], help="replace a tube's notes")
    t.add_argument("label")
    t.add_argument("text")
    t = tsub.add_parser("baseline", parents=[common],
                        help="choose the captures a section is judged against")
    t.add_argument("label")
    t.add_argument("--section", required=True, choices=["A", "B"])
    t.add_argument("--captures", nargs="+", metavar="UUID")
    t.add_argument("--clear", action="store_true", help="back to the first good captures")
    t = tsub.add_parser("delete", parents=[common], help="delete a tube and its captures")
    t.add_argument("label")
    t.add_argument("--yes", action="store_true", help="do not ask for confirmation")
    s.set_defaults(func=cmd_tube)

    s = sub.add_parser("import", parents=[common],
                       help="store a curve recorded elsewhere as a capture")
    s.add_argument("file", help="CSV: time_s,volts,amps[,light] (see `analyze`)")
    s.add_argument("--tube", required=True)
    s.add_argument("--type", help="tube type (needed for a new tube)")
    s.add_argument("--section", required=True, choices=["A", "B"])
    s.add_argument("--at", required=True, help="when it was recorded, ISO 8601")
    s.add_argument("--ambient-c", required=True, type=float, help="room temperature, C")
    s.set_defaults(func=cmd_import)

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

    s = sub.add_parser("export", parents=[common], help="copy the whole logbook to a file")
    s.add_argument("file")
    s.set_defaults(func=cmd_export)

    s = sub.add_parser("merge", parents=[common],
                       help="merge another bench's logbook (by capture UUID)")
    s.add_argument("file")
    s.set_defaults(func=cmd_merge)
