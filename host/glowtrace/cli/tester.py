"""Commands at the tester: `ports`, `sim` and `capture`."""

import sys
import time

from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

from . import console as ui
from .common import db_path, number
from .figures import capture_summary
from .tables import Col, fit


def cmd_ports(args) -> int:
    from ..tester.ports import scan
    rows = scan(probe_boards=not args.no_probe)

    def render(rows):
        if not rows:
            ui.out.print("No serial ports found.")
            return
        fit(ui.out, [Col("device"), Col("USB id", priority=2), Col("description", wrap=True,
                                                                     priority=3),
                     Col("MicroPython rp2", priority=1), Col("glowtrace", wrap=True)],
            [[r["device"], r["usb_id"] or "", r["description"] or "",
              "yes" if r["micropython_rp2"] else "",
              f"yes, firmware {r['firmware']} ({r['board']})" if r["glowtrace"] else "no"]
             for r in rows])
    ui.emit(args, rows, render)
    return 0


def sim_settings(args) -> dict:
    from ..tester.sim import SETTINGS
    s = {k: getattr(args, k) for k in SETTINGS if getattr(args, k, None) is not None}
    return {k: v for k, v in s.items() if v is not False}


def cmd_sim(args) -> int:
    from urllib.parse import urlencode

    from ..tester.sim import SimTester, build_scenario
    settings = sim_settings(args)
    sim = SimTester(build_scenario(**settings))
    path = sim.start()
    url = "glowsim://?" + urlencode({k: int(v) if isinstance(v, bool) else v
                                     for k, v in settings.items()})
    info = {"port": path, "url": url, "pid": sim.proc.pid,
            "flash": sim.scenario["state_dir"]}
    try:
        ui.emit(args, info, lambda i: ui.out.print(
            f"Simulated tester running on [bold]{i['port']}[/] (its flash: {i['flash']})\n"
            f"Use it from another terminal:  glowtrace capture --port {i['port']} "
            f"--tube ID --section A\n(or in one step: --port '{i['url']}')\n"
            "Ctrl-C stops it."))
        sys.stdout.flush()
        while sim.alive():
            time.sleep(0.2)
        ui.err.print("The simulated tester stopped:\n" + sim.stderr_text(), markup=False)
        return 1
    except KeyboardInterrupt:
        return 0
    finally:
        sim.stop()


def progress_lines(max_s: float, names=("capturing",), show_tube: bool = False):
    """A progress line per name (one per tester in a bench session), on a
    terminal: (the display, update_for(name) -> the capture's progress
    callback for that line)."""
    bar = Progress(TextColumn("[bold]{task.description}"), BarColumn(),
                   TextColumn("{task.fields[status]}"), TimeElapsedColumn(),
                   console=ui.err, transient=True, disable=not ui.err.is_terminal)
    tasks = {n: bar.add_task(n, total=max_s, status="") for n in names}

    def update_for(name: str):
        task = tasks[name]

        def update(raw):
            b = raw.blocks[-1]
            t_s = (b.t_start_us + b.interval_us * b.n_sets) / 1e6
            phase = raw.phases[b.phase - 1][0] if 0 < b.phase <= len(raw.phases) else "baseline"
            bar.update(task, completed=min(t_s, max_s),
                       status=(f"{raw.tube}: " if show_tube else "")
                       + f"{t_s:6.2f} s heater time, {phase} phase, {raw.n_sets} sets")
        return update
    return bar, update_for


def cmd_capture(args) -> int:
    from ..procedures.capture import UserInterrupt, capture_into_logbook
    from ..tester.convert import summary
    params = {"range": args.range, "max_s": args.max_s,
              "settle_band": args.settle_band, "settle_hold_s": args.settle_hold_s}
    bar, update_for = progress_lines(args.max_s)
    update = update_for("capturing")
    told = []

    def on_busy(waited_s):
        if not told:  # once: the wait goes on quietly
            told.append(waited_s)
            ui.err.print(f"The logbook is busy (another program is using it): waiting up to "
                         f"{args.busy_wait_s:g} s to store the capture...", markup=False)
    try:
        with bar:
            raw = capture_into_logbook(db_path(args), args.port, args.tube, args.section,
                                       args.type, params, update,
                                       store_wait_s=args.busy_wait_s, on_busy=on_busy)
    except UserInterrupt as e:
        off = ("heater off, confirmed by the tester" if e.off_confirmed else
               "heater-off NOT confirmed: the tester switches off by itself when "
               "the host is silent for 2 s; check it")
        ui.err.print(f"Interrupted: {off}. The partial capture {e.raw.uuid} is "
                     "stored, marked incomplete.", markup=False)
        return 130
    s = summary(raw)
    s["database"] = str(db_path(args))
    ui.emit(args, s, capture_summary)
    _cautions(args, raw)
    if args.range is None and not args.json:
        ui.err.print(f"current range: {raw.params.get('range')} (chosen from the type's rated "
                     "current; --range to choose)", markup=False, highlight=False)
    cause = raw.trip_cause
    if cause == "over_current" and raw.params.get("range") == "low":
        ui.warn("Over-current trip on the low range: a power tube's or rectifier's inrush "
                "needs --range high. If it trips there too, suspect a shorted heater.")
    if not raw.complete:
        ui.warn(f"Capture incomplete: {raw.incomplete_reason}")
        return 2
    suspect = {sec: m["not_judged"] for sec, m in
               (raw.analysis or {}).get("sections", {}).items() if m.get("tester_fault")}
    for sec, why in suspect.items():
        ui.warn(f"Section {sec} not judged: {why}.")
    if cause in ("open_heater", "over_current"):
        ui.warn(f"The tester switched off: {cause.replace('_', ' ')}. The capture is stored "
                "and judged as what it is" + (" (a fault of the tester, see above)."
                                              if suspect else "."))
        return 3
    return 0


def _cautions(args, raw) -> None:
    """After a capture: the mains-chassis caution for a series-string type,
    and a hot power tube."""
    from .. import catalogue, safety
    if args.json or not args.type:
        return
    kind = catalogue.load().get(args.type)
    if safety.series_string(kind):
        ui.warn(safety.MAINS_CHASSIS)
    watts = kind.section_rating().watts * len(raw.section or "A")
    hot = safety.hot_after(watts, "The tube", min_w=2.5)
    if hot:
        ui.warn(hot)


METAVARS = {float: "X", int: "N", str: "TEXT"}
MAX_CAPTURE_S = 300.0  # the reference tester's on-time limit (schematics/frontend.json)


def register(sub, common) -> None:
    s = sub.add_parser("ports", parents=[common], help="list serial ports and testers")
    s.add_argument("--no-probe", action="store_true",
                   help="do not ask MicroPython boards whether they run glowtrace")
    s.set_defaults(func=cmd_ports)

    from ..tester.sim import SETTINGS, tube_presets
    s = sub.add_parser("sim", parents=[common],
                       help="run the simulated tester and print its port",
                       description="Run the simulated tester (the real firmware under "
                                   "micropython) on a pseudo-terminal. Every setting here "
                                   "is also a glowsim:// URL query key, with _ for -.")
    for key, setting in SETTINGS.items():
        flag = "--" + key.replace("_", "-")
        if setting.kind is bool:
            s.add_argument(flag, dest=key, action="store_true", help=setting.help)
        elif key == "tube":
            s.add_argument(flag, dest=key, default="12AX7", choices=sorted(tube_presets()),
                           metavar="TYPE", help=setting.help + ": "
                           + ", ".join(sorted(tube_presets())))
        else:
            s.add_argument(flag, dest=key, type=setting.kind, choices=setting.choices or None,
                           metavar=None if setting.choices else METAVARS[setting.kind],
                           help=setting.help)
    s.set_defaults(func=cmd_sim)

    s = sub.add_parser("capture", parents=[common], help="capture one start-up curve")
    s.add_argument("--port", help="serial device, or a glowsim:// URL "
                                  "(default: the one tester found on USB)")
    s.add_argument("--tube", required=True, help="your label for the tube")
    s.add_argument("--section", required=True, choices=["A", "B", "AB"],
                   help="heater section(s) to switch on")
    s.add_argument("--type", help="tube type, e.g. 12AX7 (stored with a new tube)")
    s.add_argument("--range", choices=["low", "high"],
                   help="current range: low to 3.3 A, high to 33 A (default: high when the "
                        "type's inrush can reach the low range's trip, else low)")
    s.add_argument("--max-s", type=number(1, MAX_CAPTURE_S), default=60.0,
                   help=f"longest capture, s (1 to {MAX_CAPTURE_S:g}; default 60)")
    s.add_argument("--settle-band", type=number(0, 0.49, above=True), default=0.01,
                   help="the capture ends once the current is within this share of its "
                        "predicted final value ... (default 0.01)")
    s.add_argument("--settle-hold-s", type=number(0, 60, above=True), default=0.3,
                   help="... and has been for this long, s (default 0.3)")
    s.add_argument("--busy-wait-s", type=number(0, 86400), default=60.0,
                   help="how long to wait for a logbook another program is using before "
                        "the capture is kept in a file for `glowtrace recover` (default 60)")
    s.set_defaults(func=cmd_capture)

