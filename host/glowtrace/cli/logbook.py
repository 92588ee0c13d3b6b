"""Logbook commands: `owner`, `tube`, `import`, `export` and `merge`."""

from rich.text import Text

from ..logbook import records
from ..logbook.store import Store
from . import console as ui
from .common import confirm, db_path, number
from .figures import warnings
from .tables import Col, fit, pairs


def _fields(r: dict) -> None:
    pairs(ui.out, [(k, v) for k, v in r.items() if v is not None])


def cmd_owner(args) -> int:
    with Store(db_path(args)) as store:
        if args.action == "add":
            res = records.add_owner(store, args.name, args.contact, args.notes)
        elif args.action == "list":
            res = records.list_owners(store)
        elif args.action == "show":
            from .. import config
            from ..outputs.stock import owner_summary
            res = owner_summary(store, args.name, config.load(None))
        elif args.action == "rename":
            records.rename_owner(store, args.name, args.new_name)
            res = {"renamed": args.name, "to": args.new_name}
        else:
            records.require_owner(store, args.name)
            confirm(args, f"owner {args.name!r}", args.name)
            records.delete_owner(store, args.name)
            res = {"deleted": args.name}

    def render(r):
        if "tubes" in r and isinstance(r, dict):
            return render_owner_summary(r)
        if isinstance(r, list):
            fit(ui.out, [Col("owner"), Col("contact", priority=2),
                         Col("tubes", justify="right"), Col("notes", wrap=True, priority=1)],
                [[o["name"], o["contact"] or "", str(o["tubes"]), o["notes"] or ""] for o in r])
        else:
            _fields(r)
    ui.emit(args, res, render)
    return 0


def render_owner_summary(r: dict) -> None:
    title = r["owner"] + (f" ({r['contact']})" if r["contact"] else "")
    if not r["tubes"]:
        ui.out.print(f"{title}: no tubes recorded.", markup=False)
        return
    fit(ui.out, [Col("tube"), Col("type", priority=1), Col("status"), Col("grade"),
                 Col("last seen"), Col("first reason", wrap=True, priority=2)],
        [[t["tube"], t["type"] or "", ui.status_text(t["status"]), t["grade"] or "-",
          t["last_seen"] or "never", t["reason"] or ""] for t in r["tubes"]],
        title=title,
        caption=", ".join(f"{n} {s}" for s, n in sorted(r["statuses"].items()))
        + ". Heater only: not emission, gain or noise.")


def cmd_tube(args) -> int:
    with Store(db_path(args)) as store:
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
                raise records.RecordError("give --owner NAME or --no-owner")
            records.move_tube(store, args.label, None if args.no_owner else args.owner)
            res = records.require_tube(store, args.label)
        elif a == "note":
            res = records.update_tube(store, args.label, notes=args.text)
        elif a == "baseline":
            res = records.set_baseline(store, args.label, args.section, args.captures,
                                       args.clear)
        else:
            n = records.count_captures(store, args.label)
            confirm(args, f"tube {args.label!r} and its {n} capture(s)", args.label)
            res = {"deleted": args.label, "captures_deleted": records.delete_tube(store, args.label)}
    ui.emit(args, res, _render_tube)
    return 0


def _render_tube(r) -> None:
    if isinstance(r, list):
        fit(ui.out, [Col("tube"), Col("type"), Col("owner", priority=1),
                     Col("captures", justify="right", priority=2),
                     Col("last capture (UTC)", priority=3), Col("notes", wrap=True, priority=4)],
            [[x["label"], x["type"] or "", x["owner"] or "", str(x["captures"]),
              (x["last_capture"] or "")[:16].replace("T", " "), x["notes"] or ""] for x in r])
    elif "captures" in r and isinstance(r["captures"], list):
        pairs(ui.out, [("tube", Text(r["label"], style="bold")),
                       ("type", r["type"] or "unknown"), ("owner", r["owner"] or "-"),
                       ("sections", ", ".join(r["sections"])),
                       *([("notes", r["notes"])] if r["notes"] else []),
                       ("captures", f"{len(r['captures'])}; `glowtrace history {r['label']}` "
                                    "for the assessment")])
    else:
        _fields(r)


def cmd_import(args) -> int:
    from ..procedures.importing import import_curve
    with Store(db_path(args)) as store:
        uuid, analysis, notes = import_curve(store, args.file, args.tube, args.type,
                                             args.section, args.at, args.ambient_c)
    m = analysis["sections"][args.section]
    res = {"uuid": uuid, "tube": args.tube, "section": args.section, "analysis": m,
           "warnings": notes + m.get("warnings", [])}

    def render(r):
        ui.out.print(f"Stored {r['uuid']} for {r['tube']} section {r['section']}: cold start "
                     f"{ui.fmt(m.get('cold_start_ok'), 0)}, flash index "
                     f"{ui.fmt(m.get('flash_index'), 3)}", markup=False)
        warnings(r["warnings"])
    ui.emit(args, res, render)
    return 0


def cmd_export(args) -> int:
    from ..logbook.exchange import export_db
    with Store(db_path(args), create=False) as store:
        size = export_db(store, args.file)
    ui.emit(args, {"file": args.file, "bytes": size}, lambda r: ui.out.print(
        f"Exported the logbook to {r['file']} ({r['bytes']:,} bytes).", markup=False))
    return 0


def cmd_merge(args) -> int:
    from ..logbook.exchange import merge_db
    with Store(db_path(args)) as store:
        res = merge_db(store, args.file)

    def render(r):
        ui.out.print("Merged: " + ", ".join(f"{n} {t}" for t, n in r["added"].items() if n)
                     if any(r["added"].values()) else "Nothing new to merge.")
        warnings([f"tube {c['tube']}: here {c['here']}, there {c['there']} (kept as here)"
                  for c in r["conflicts"]])
    ui.emit(args, res, render)
    return 0


def register(sub, common) -> None:
    s = sub.add_parser("owner", parents=[common], help="customers who own tubes")
    osub = s.add_subparsers(dest="action", required=True, metavar="ACTION")
    o = osub.add_parser("add", parents=[common], help="add an owner")
    o.add_argument("name")
    o.add_argument("--contact")
    o.add_argument("--notes")
    osub.add_parser("list", parents=[common], help="list owners")
    o = osub.add_parser("show", parents=[common],
                        help="an owner's tubes: status, grade, last seen")
    o.add_argument("name", help="owner or lot (any case)")
    o = osub.add_parser("rename", parents=[common], help="rename an owner")
    o.add_argument("name")
    o.add_argument("new_name")
    o = osub.add_parser("delete", parents=[common], help="delete an owner without tubes")
    o.add_argument("name")
    o.add_argument("--yes", action="store_true", help="do not ask for confirmation")
    s.set_defaults(func=cmd_owner)

    s = sub.add_parser("tube", parents=[common],
                       help="tubes: add, list, show, rename, move, note, baseline, delete")
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
    s.add_argument("--ambient-c", required=True, type=number(-40, 80),
                   help="room temperature, C")
    s.set_defaults(func=cmd_import)

    s = sub.add_parser("export", parents=[common], help="copy the whole logbook to a file")
    s.add_argument("file")
    s.set_defaults(func=cmd_export)

    s = sub.add_parser("merge", parents=[common],
                       help="merge another bench's logbook (by capture UUID)")
    s.add_argument("file")
    s.set_defaults(func=cmd_merge)
