"""The `glowtrace` command: parses options, calls one library function per
command and turns library errors into one-line messages."""

import argparse
import os
import signal
import sys
import time
from pathlib import Path

from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from . import __version__, cli_hardware, cli_logbook, paths
from .cli_common import SAFETY_NOTE, _db, _emit, _fmt, _num, err, out
from .errors import GlowtraceError

# ports ---------------------------------------------------------------------
def cmd_ports(args) -> int:
    from .ports import scan
    rows = scan(probe_boards=not args.no_probe)

    def render(rows):
        if not rows:
            out.print("No serial ports found.")
            return
        t = Table("device", "USB id", "description", "MicroPython rp2", "glowtrace")
        for r in rows:
            gt = f"yes, firmware {r['firmware']} ({r['board']})" if r["glowtrace"] else "no"
            t.add_row(r["device"], r["usb_id"] or "", r["description"] or "",
                      "yes" if r["micropython_rp2"] else "", gt)
        out.print(t)
    _emit(args, rows, render)
    return 0


# sim -----------------------------------------------------------------------
def _sim_settings(args) -> dict:
    keys = ("tube", "serial", "ambient_c", "flash_a", "flash_b", "fault", "fault_section",
            "supply_v", "source_ohm", "preheat_k", "reset_at_s", "pace", "seed",
            "section_v", "section_a", "hot_cold_ratio", "tau_sleeve_s")
    s = {k: getattr(args, k) for k in keys if getattr(args, k) is not None}
    if args.light:
        s["light"] = 1
    return s


def cmd_sim(args) -> int:
    from urllib.parse import urlencode

    from .sim import SimTester, build_scenario
    settings = _sim_settings(args)
    # the simulated board's flash (its calibration) lives on between runs
    state = paths.default_db_path().parent / "sim" / settings.get("serial", "0001")
    state.mkdir(parents=True, exist_ok=True)
    sim = SimTester(dict(build_scenario(**settings), state_dir=str(state)))
    path = sim.start()
    url = "glowsim://?" + urlencode(settings)
    info = {"port": path, "url": url, "pid": sim.proc.pid}
    try:
        _emit(args, info, lambda i: out.print(
            f"Simulated tester running on [bold]{i['port']}[/]\n"
            f"Use it from another terminal:  glowtrace capture --port {i['port']} "
            f"--tube ID --section A\n(or in one step: --port '{i['url']}')\n"
            "Ctrl-C stops it."))
        sys.stdout.flush()
        while sim.alive():
            time.sleep(0.2)
        err.print("The simulated tester stopped:\n" + sim.stderr_text())
        return 1
    except KeyboardInterrupt:
        return 0
    finally:
        sim.stop()


# capture -------------------------------------------------------------------
def _progress_bar(max_s: float):
    bar = Progress(TextColumn("[bold]{task.description}"), BarColumn(),
                   TextColumn("{task.fields[status]}"), TimeElapsedColumn(),
                   console=err, transient=True)
    task = bar.add_task("capturing", total=max_s, status="")

    def update(raw):
        b = raw.blocks[-1]
        t_s = (b.t_start_us + b.interval_us * b.n_sets) / 1e6
        phase = raw.phases[b.phase - 1][0] if 0 < b.phase <= len(raw.phases) else "baseline"
        bar.update(task, completed=min(t_s, max_s),
                   status=f"{t_s:6.2f} s heater time, {phase} phase, {raw.n_sets} sets")
    return bar, update


ALL_LABELS = {
    "peak_current_a": ("peak current", "A"),
    "cold_resistance_ohm": ("cold resistance, at the test", "ohm"),
    "cold_resistance_20c_ohm": ("cold resistance at 20 C", "ohm"),
    "hot_current_a": ("hot current", "A"),
    "hot_resistance_ohm": ("hot resistance", "ohm"),
    "hot_power_w": ("hot power", "W"),
    "hot_cold_ratio": ("hot / cold resistance", "x"),
    "inrush_ratio": ("inrush: peak / hot current", "x"),
    "warmup_50_s": ("warm-up to 50 %", "s"),
    "warmup_90_s": ("warm-up to 90 %", "s"),
    "settle_1pct_s": ("settled within 1 %", "s"),
    "cold_start_ok": ("cold start", ""),
    "flash_index": ("flash index", ""),
    "light_overshoot": ("light peak / settled", "x"),
    "rated_peak_current_a": ("peak at rated voltage, stiff supply", "A"),
    "rated_warmup_90_s": ("warm-up to 90 % at rated voltage", "s"),
    "series_warmup_s": ("series-string warm-up (to 80 %)", "s"),
    "rated_volts": ("rated volts (section)", "V"),
    "rated_amps": ("rated amps (section)", "A"),
    "ambient_c": ("room temperature", "C"),
    "analysis_version": ("analysis version", ""),
    "type": ("type", ""),
}

# the figures a capture's summary shows, with significant digits
SUMMARY_FIGURES = {"cold_resistance_20c_ohm": 4, "hot_current_a": 4, "inrush_ratio": 3,
                   "warmup_90_s": 3, "settle_1pct_s": 3, "flash_index": 3,
                   "light_overshoot": 3, "cold_start_ok": 0}


def _render_summary(s: dict) -> None:
    t = Table(show_header=False, box=None)
    for k, v in s.items():
        if k not in ("analysis", "warnings"):
            t.add_row(k, str(v))
    out.print(t)
    analysis = s.get("analysis") or {}
    if analysis:
        secs = list(analysis)
        t = Table("figure", *[f"section {x}" for x in secs], "unit", title="analysis")
        for key, digits in SUMMARY_FIGURES.items():
            if any(key in analysis[x] for x in secs):
                label, unit = ALL_LABELS[key]
                t.add_row(label, *[_fmt(analysis[x].get(key), digits) for x in secs], unit)
        out.print(t)
        for x in secs:
            for w in analysis[x].get("warnings", []):
                err.print(f"[yellow]section {x}: {w}[/]")
    for w in s.get("warnings", []):
        err.print(f"[yellow]{w}[/]")


def cmd_capture(args) -> int:
    from .convert import summary
    from .ports import find_tester
    from .procedure import UserInterrupt, run_capture
    from .store import Store
    from .records import check_capture_target
    if args.type:
        from . import catalogue
        args.type = catalogue.load().get(args.type).name  # unknown type: stop before switching on
    if Path(_db(args)).exists():  # a known tube: its type and sections must fit
        with Store(_db(args)) as store:
            kind = check_capture_target(store, args.tube, args.type, args.section)
    else:
        kind = check_capture_target(None, args.tube, args.type, args.section)
    port = args.port or find_tester()
    params = {"range": args.range, "max_s": args.max_s,
              "settle_band": args.settle_band, "settle_hold_s": args.settle_hold_s}
    with Store(_db(args)) as store:
        bar, update = _progress_bar(args.max_s)
        try:
            with bar:
                raw = run_capture(port, store, args.tube, args.section, params, update,
                                  tube_type=kind)
        except UserInterrupt as e:
            off = ("heater off, confirmed by the tester" if e.off_confirmed else
                   "heater-off NOT confirmed: the tester switches off by itself when "
                   "the host is silent for 2 s; check it")
            err.print(f"Interrupted: {off}. The partial capture {e.raw.uuid} is "
                      "stored, marked incomplete.")
            return 130
    s = summary(raw)
    s["database"] = str(_db(args))
    _emit(args, s, _render_summary)
    if raw.trip and raw.trip["cause"] == "over_current" and args.range == "low":
        err.print("[yellow]Over-current trip on the low range: a power tube's or "
                  "rectifier's inrush needs --range high. If it trips there too, "
                  "suspect a shorted heater.[/]")
    if not raw.complete:
        err.print(f"[yellow]Capture incomplete: {raw.incomplete_reason}[/]")
        return 2
    return 0


# list / show ---------------------------------------------------------------
def cmd_list(args) -> int:
    from .store import Store
    with Store(_db(args), create=False) as store:
        rows = store.list_captures(args.tube)

    def render(rows):
        if not rows:
            out.print("No captures stored.")
            return
        t = Table("uuid", "tube", "type", "section", "started (UTC)", "end", "sets", "kB")
        for r in rows:
            end = r["end_reason"] or "-"
            if r["trip_cause"]:
                end += f" ({r['trip_cause']})"
            if not r["complete"]:
                end = f"[yellow]incomplete: {r['incomplete_reason']}[/]"
            t.add_row(r["uuid"][:8], r["tube"], r["type"] or "", r["section"],
                      r["started_at"][:19], end, str(r["n_sets"]),
                      f"{(r['sample_bytes'] or 0) / 1000:.1f}")
        out.print(t)
    _emit(args, rows, render)
    return 0


def cmd_show(args) -> int:
    from .analysis.curve import stored_curves
    from .convert import KEY_FIGURES, summary
    from .store import Store
    with Store(_db(args), create=False) as store:
        uuid = store.find_uuid(args.uuid)
        analysis = store.analysis(uuid)
        if store.capture_source(uuid) == "import":
            row = store.db["captures"].get(uuid)
            s = {k: row[k] for k in ("uuid", "tube", "section", "started_at", "ambient_c",
                                     "n_sets")}
            s.update(source="import", file=row["port"])
            secs = (analysis or {}).get("sections", {})
            s["analysis"] = {sec: {k: m.get(k) for k in KEY_FIGURES if k in m}
                             for sec, m in secs.items()}
            tube, sections = row["tube"], row["section"]
        else:
            raw = store.load_capture(uuid)
            raw.analysis = analysis
            s = summary(raw)
            s.update(board=raw.hello.get("board"), firmware=raw.hello.get("firmware"),
                     calibration=raw.hello.get("calibration"), params=raw.params,
                     link=raw.link)
            tube, sections = raw.tube, raw.section
        curves = stored_curves(store, uuid) if args.plot else {}
    if args.json:
        s["analysis"] = analysis
    _emit(args, s, _render_summary)
    if curves:
        from . import plots
        for sec, c in curves.items():
            path = _plot_path(args.plot, sec, len(sections) > 1)
            plots.figure(c, (analysis or {}).get("sections", {}).get(sec, {}), path,
                         f"{tube} section {sec}")
            err.print(f"wrote {path}")
    return 0


def _plot_path(path: str, section: str, several: bool) -> Path:
    p = Path(path)
    return p.with_name(f"{p.stem}-{section}{p.suffix}") if several else p


# analyze / reanalyze / types --------------------------------------------------
def cmd_analyze(args) -> int:
    from . import catalogue, plots
    from .analysis.analyze import analyze_curve
    from .csvio import read_curve
    curve, file_warnings = read_curve(args.file)
    tube_type = catalogue.load().get(args.type) if args.type else None
    if (args.rated_volts is None) != (args.rated_amps is None):
        raise GlowtraceError("give both --rated-volts and --rated-amps, or --type")
    if tube_type and args.rated_volts:
        raise GlowtraceError("give either --type or --rated-volts/--rated-amps, not both")
    for x in (args.rated_volts, args.rated_amps):
        if x is not None and x <= 0:
            raise GlowtraceError("rated volts and amps must be positive")
    ambient = args.ambient_c
    notes = list(file_warnings)
    if ambient is None:
        ambient = 20.0
        notes.append("no --ambient-c given: 20 C assumed for the cold resistance")
    elif not -40 <= ambient <= 80:
        raise GlowtraceError("--ambient-c must be a room temperature in C (-40..80)")
    try:
        result = analyze_curve(curve, ambient, tube_type, args.rated_volts, args.rated_amps,
                               fit_model=not args.no_fit)
    except ValueError as e:
        raise GlowtraceError(f"{args.file}: {e}") from None
    result["warnings"] = notes + result["warnings"]
    if tube_type:
        result["type"] = tube_type.name
    if args.plot:
        plots.figure(curve, result, args.plot, Path(args.file).name)

    def render(r):
        t = Table("figure", "value", "unit", "JSON key", title=f"{Path(args.file).name}"
                  + (f" ({tube_type.name})" if tube_type else ""))
        for k, v in r.items():
            if k not in ("warnings", "thermal_model"):
                label, unit = ALL_LABELS.get(k, (k, ""))
                t.add_row(label, _fmt(v, 5), unit, k)
        out.print(t)
        for w in r["warnings"]:
            err.print(f"[yellow]{w}[/]")
        print(plots.terminal_plot(curve, min(out.width, 100), 18, Path(args.file).name))
    _emit(args, result, render)
    if args.plot:
        err.print(f"wrote {args.plot}")
    return 0


def cmd_reanalyze(args) -> int:
    from .analysis import ANALYSIS_VERSION
    from .analysis.runner import analyze_stored, reanalyze
    from .store import Store
    with Store(_db(args), create=False) as store:
        if args.uuid:
            done = [store.find_uuid(u) for u in args.uuid]
            for u in done:
                analyze_stored(store, u)
        else:
            bar = Progress(TextColumn("analysing"), BarColumn(), TextColumn("{task.completed}/{task.total}"),
                           console=err, transient=True)
            with bar:
                task = bar.add_task("", total=None)
                done = reanalyze(store, args.force,
                                 lambda n, total: bar.update(task, completed=n, total=total))
    res = {"analysis_version": ANALYSIS_VERSION, "analysed": len(done), "captures": done}
    _emit(args, res, lambda r: out.print(
        f"Analysed {r['analysed']} capture(s) with analysis version {r['analysis_version']}."))
    return 0


def cmd_types(args) -> int:
    from . import catalogue
    cat = catalogue.load()
    rows = []
    for name in cat.names():
        t = cat.get(name)
        sec = t.section_rating()
        rows.append({"type": t.name, "aliases": list(t.aliases), "base": t.base,
                     "series": [t.series.volts, t.series.amps] if t.series else None,
                     "parallel": [t.parallel.volts, t.parallel.amps] if t.parallel else None,
                     "heater": [t.heater.volts, t.heater.amps] if t.heater else None,
                     "section_volts": sec.volts, "section_amps": sec.amps,
                     "controlled_warmup_s": t.controlled_warmup_s, "filament": t.filament,
                     "source": t.source})

    def render(rows):
        t = Table("type", "also", "base", "heater", "per section", "warm-up", "source")
        for r in rows:
            if r["heater"]:
                h = f"{r['heater'][0]:g} V {r['heater'][1]:g} A"
            else:
                h = (f"{r['series'][0]:g} V {r['series'][1]:g} A / "
                     f"{r['parallel'][0]:g} V {r['parallel'][1]:g} A")
            t.add_row(r["type"], ", ".join(r["aliases"]), r["base"] or "", h,
                      f"{r['section_volts']:g} V {r['section_amps']:g} A",
                      f"{r['controlled_warmup_s']:g} s" if r["controlled_warmup_s"] else "",
                      r["source"])
        out.print(t)
    _emit(args, rows, render)
    return 0


# demo ----------------------------------------------------------------------
def cmd_demo(args) -> int:
    from .demo import SHOP, run_demo
    db = Path(args.db) if args.db else paths.default_db_path().with_name("demo.db")
    if not args.json:
        out.print(f"[bold]{SHOP}[/]: earlier visits, then this morning at the bench, on the "
                  "simulated tester (real firmware under micropython).")

    def progress(n, total, t, when):
        if t is None:
            err.print("  calibrating the tester: socket empty, then a 4.7 ohm reference")
            return
        day = f"visit of {when[:10]}" if when else "today"
        err.print(f"  [{n}/{total}] {t.label} {t.tube_type} section {t.section}, {day}")
    t0 = time.monotonic()
    res = run_demo(db, progress)
    elapsed = time.monotonic() - t0

    def render(res):
        t = Table("tube", "type", "owner", "sect.", "peak A", "hot A", "inrush",
                  "warm-up 90 %", "flash index", "kB", title=f"Today's captures, stored in {db}")
        for r in res["captures"]:
            for sec in r["section"]:
                a = r.get("analysis", {}).get(sec, {})
                flash = a.get("flash_index")
                t.add_row(r["tube"], r["type"], r["customer"], sec,
                          f"{r[f'peak_a_{sec}']:.3f}", _num(r[f"final_a_{sec}"], 3),
                          _fmt(a.get("inrush_ratio"), 3) + "x",
                          _fmt(a.get("warmup_90_s"), 3) + " s",
                          ("[bold red]" if flash and flash > 0.02 else "") + _fmt(flash, 2),
                          f"{r['stored_bytes'] / 1000:.1f}")
        out.print(t)
        t = Table("tube", "owner", "status", "grade", "why", title="The logbook's judgement")
        for a in res["tubes"]:
            colour = "green" if a["status"] == "steady" else (
                "cyan" if a["status"] == "new" else "red")
            t.add_row(a["tube"], a["owner"] or "", f"[{colour}]{a['status']}[/]",
                      a["grade"] or "-", a["reasons"][0])
        out.print(t)
        out.print(f"{len(res['captures'])} captures today and the earlier visits in "
                  f"{elapsed:.1f} s. Try: glowtrace history KS-0117-V2 --db {db}")
    _emit(args, dict(res, database=str(db), seconds=round(elapsed, 2)), render)
    return 0


# parser --------------------------------------------------------------------
def build_parser() -> argparse.ArgumentParser:
    common = argparse.ArgumentParser(add_help=False)
    common.add_argument("--db", metavar="PATH",
                        help="SQLite database (default: $GLOWTRACE_DB or "
                             "~/.local/share/glowtrace/glowtrace.db)")
    common.add_argument("--json", action="store_true", help="print machine-readable JSON")

    p = argparse.ArgumentParser(
        prog="glowtrace",
        description="Bench instrument and logbook for vacuum-tube heaters.",
        epilog=SAFETY_NOTE)
    p.add_argument("--version", action="version", version=f"glowtrace {__version__}")
    sub = p.add_subparsers(dest="command", required=True, metavar="COMMAND")

    s = sub.add_parser("ports", parents=[common], help="list serial ports and testers")
    s.add_argument("--no-probe", action="store_true",
                   help="do not ask MicroPython boards whether they run glowtrace")
    s.set_defaults(func=cmd_ports)

    s = sub.add_parser("sim", parents=[common],
                       help="run the simulated tester and print its port")
    s.add_argument("--tube", default="12AX7", help="heater preset (default 12AX7)")
    s.add_argument("--serial", help="board serial shown in its id")
    s.add_argument("--ambient-c", type=float, help="room temperature, C")
    s.add_argument("--flash-a", type=float, help="share of section A that flashes (0-0.3)")
    s.add_argument("--flash-b", type=float, help="share of section B that flashes (0-0.3)")
    s.add_argument("--fault", choices=["open", "short", "intermittent", "converter"],
                   help="simulated fault (converter: the ADC fails 0.1 s after switch-on)")
    s.add_argument("--fault-section", choices=["A", "B"])
    s.add_argument("--supply-v", type=float, help="heater supply voltage")
    s.add_argument("--source-ohm", type=float, help="supply source resistance (sag)")
    s.add_argument("--preheat-k", type=float, help="heater starts this many K above room")
    s.add_argument("--reset-at-s", type=float, help="board resets at this heater time")
    s.add_argument("--pace", type=float, help="simulated seconds per wall second (0: flat out)")
    s.add_argument("--seed", type=int, help="noise seed")
    s.add_argument("--light", action="store_true", help="fit the photodiode channel")
    s.add_argument("--section-v", type=float, help="rated heater volts per section")
    s.add_argument("--section-a", type=float, help="rated heater amps per section")
    s.add_argument("--hot-cold-ratio", type=float, help="hot over cold resistance")
    s.add_argument("--tau-sleeve-s", type=float, help="cathode sleeve time constant, s")
    s.set_defaults(func=cmd_sim)

    s = sub.add_parser("capture", parents=[common], help="capture one start-up curve")
    s.add_argument("--port", help="serial device, or a glowsim:// URL "
                                  "(default: the one tester found on USB)")
    s.add_argument("--tube", required=True, help="your label for the tube")
    s.add_argument("--section", required=True, choices=["A", "B", "AB"],
                   help="heater section(s) to switch on")
    s.add_argument("--type", help="tube type, e.g. 12AX7 (stored with a new tube)")
    s.add_argument("--range", choices=["low", "high"], default="low",
                   help="current range: low to 3.3 A, high to 33 A (default low)")
    s.add_argument("--max-s", type=float, default=60.0, help="longest capture, s (default 60)")
    s.add_argument("--settle-band", type=float, default=0.005,
                   help="relative band for the adaptive end (default 0.005)")
    s.add_argument("--settle-hold-s", type=float, default=2.0,
                   help="time the current must stay in the band, s (default 2)")
    s.set_defaults(func=cmd_capture)

    s = sub.add_parser("list", parents=[common], help="list stored captures")
    s.add_argument("--tube", help="only this tube")
    s.set_defaults(func=cmd_list)

    s = sub.add_parser("show", parents=[common], help="show one stored capture")
    s.add_argument("uuid", help="capture UUID (a unique prefix will do)")
    s.add_argument("--plot", metavar="FILE.png", help="write the curve as a figure")
    s.set_defaults(func=cmd_show)

    s = sub.add_parser("analyze", parents=[common],
                       help="measure a start-up curve from a CSV file (any instrument)")
    s.add_argument("file", help="CSV with columns time_s,volts,amps[,light]; # comments")
    s.add_argument("--ambient-c", type=float, help="room temperature of the test, C")
    s.add_argument("--type", help="tube type from the catalogue (sets the rating)")
    s.add_argument("--rated-volts", type=float, help="rated heater volts (without --type)")
    s.add_argument("--rated-amps", type=float, help="rated heater amps (without --type)")
    s.add_argument("--plot", metavar="FILE.png", help="also write a matplotlib figure")
    s.add_argument("--no-fit", action="store_true",
                   help="model-free figures only (no thermal model, no predictions)")
    s.set_defaults(func=cmd_analyze)

    s = sub.add_parser("reanalyze", parents=[common],
                       help="re-run the current analysis on stored captures")
    s.add_argument("uuid", nargs="*", help="only these captures (default: every one "
                                           "without the current analysis)")
    s.add_argument("--force", action="store_true", help="all captures, even if current")
    s.set_defaults(func=cmd_reanalyze)

    s = sub.add_parser("types", parents=[common], help="list the tube catalogue")
    s.set_defaults(func=cmd_types)

    cli_logbook.register(sub, common)
    cli_hardware.register(sub, common)

    s = sub.add_parser("demo", parents=[common],
                       help="capture an invented shop's tubes on the simulated tester")
    s.set_defaults(func=cmd_demo)
    return p


def main(argv=None) -> int:
    args = build_parser().parse_args(argv)
    # a terminal's hang-up stops a capture the way Ctrl-C does: heater off
    signal.signal(signal.SIGTERM, lambda *a: (_ for _ in ()).throw(KeyboardInterrupt()))
    try:
        return args.func(args)
    except GlowtraceError as e:
        err.print(f"glowtrace: error: {e}", markup=False, highlight=False)
        return 1
    except KeyboardInterrupt:
        err.print("Interrupted.")
        return 130
    except BrokenPipeError:
        # the reader went away (`glowtrace list | head`): stop quietly
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0


if __name__ == "__main__":
    sys.exit(main())
