"""The `glowtrace` command: parses options, calls one library function per
command and turns library errors into one-line messages."""

import argparse
import json
import signal
import sys
import time
from pathlib import Path

from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from . import __version__, paths
from .errors import GlowtraceError

out = Console()
err = Console(stderr=True)

SAFETY_NOTE = ("Heater leads, shunts and the tube get hot; a shorted heater can "
               "burn a trace. Run the tester from a fused low-voltage supply.")


def _db(args) -> Path:
    return Path(args.db) if args.db else paths.default_db_path()


def _num(value, digits: int) -> str:
    return "-" if value is None else f"{value:.{digits}f}"


def _emit(args, data, render) -> None:
    if args.json:
        print(json.dumps(data, indent=2, default=str))
    else:
        render(data)


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
    sim = SimTester(build_scenario(**settings))
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


def _render_summary(s: dict) -> None:
    t = Table(show_header=False, box=None)
    for k, v in s.items():
        t.add_row(k, str(v))
    out.print(t)


def cmd_capture(args) -> int:
    from .convert import summary
    from .ports import find_tester
    from .procedure import UserInterrupt, run_capture
    from .store import Store
    port = args.port or find_tester()
    params = {"range": args.range, "max_s": args.max_s,
              "settle_band": args.settle_band, "settle_hold_s": args.settle_hold_s}
    with Store(_db(args)) as store:
        bar, update = _progress_bar(args.max_s)
        try:
            with bar:
                raw = run_capture(port, store, args.tube, args.section, params, update,
                                  tube_type=args.type)
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
    from .convert import summary
    from .store import Store
    with Store(_db(args), create=False) as store:
        raw = store.load_capture(args.uuid)
    s = summary(raw)
    s.update(board=raw.hello.get("board"), firmware=raw.hello.get("firmware"),
             calibration=raw.hello.get("calibration"), params=raw.params, link=raw.link)
    _emit(args, s, _render_summary)
    return 0


# demo ----------------------------------------------------------------------
def cmd_demo(args) -> int:
    from .demo import SHOP, run_demo
    db = Path(args.db) if args.db else paths.default_db_path().with_name("demo.db")
    if not args.json:
        out.print(f"[bold]{SHOP}[/]: a morning at the bench on the simulated tester "
                  "(real firmware under micropython).")

    def progress(n, total, t):
        err.print(f"  [{n}/{total}] {t.label} {t.tube_type} section {t.section} "
                  f"({t.customer})")
    t0 = time.monotonic()
    rows = run_demo(db, progress)
    elapsed = time.monotonic() - t0

    def render(rows):
        t = Table("tube", "type", "customer", "sect.", "end", "peak A", "hot A",
                  "supply V", "glow peak", "kB", title=f"Stored in {db}")
        for r in rows:
            glow = r.get("glow_peak_over_settled")
            for sec in r["section"]:
                t.add_row(r["tube"], r["type"], r["customer"].split(",")[0], sec,
                          r["end_reason"], f"{r[f'peak_a_{sec}']:.3f}",
                          _num(r[f"final_a_{sec}"], 3), f"{r['supply_v']:.2f}",
                          f"{glow:.2f}x" if glow else "-",
                          f"{r['stored_bytes'] / 1000:.1f}")
        out.print(t)
        out.print(f"{len(rows)} captures in {elapsed:.1f} s. Try: glowtrace list --db {db}")
    _emit(args, {"database": str(db), "captures": rows, "seconds": round(elapsed, 2)},
          lambda d: render(d["captures"]))
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
    s.set_defaults(func=cmd_show)

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


if __name__ == "__main__":
    sys.exit(main())
