"""Tester commands: which socket to use, calibration, self-test, firmware."""

from rich.text import Text

from .. import catalogue
from ..errors import GlowtraceError
from ..tester.driver import connect
from ..tester.sim import with_load
from . import console as ui
from .common import db_path, number
from .figures import gains_table


def cmd_socket(args) -> int:
    from .. import safety
    from ..tester.sockets import variant_for, variant_hint, variant_limits, wiring_for
    t = catalogue.load().get(args.type)
    fitted = args.fitted.split(",") if args.fitted else None
    volts = t.section_rating().volts
    variant = args.variant or variant_for(volts)
    if variant is None:
        raise GlowtraceError(f"a {t.name} heater needs {volts:g} V: {variant_hint(volts)}")
    w = wiring_for(t, fitted, variant_limits()[variant])
    res = {"type": t.name, "variant": variant, "socket": w.socket, "wiring": w.wiring,
           "supply_pin": w.supply_pin, "section_pins": w.section_pins, "supply_v": w.supply_v,
           "section_amps": w.section_a, "sections": "".join(w.section_pins),
           "caution": safety.MAINS_CHASSIS if safety.series_string(t) else None}

    def render(r):
        ui.out.print(
            f"{t.name}: {w.describe()}.\nThe {variant} variant of the tester"
            + (" (series-string heaters to 55 V) is needed" if variant != "30V" else "")
            + f". Capture with --section {'A, B or AB' if len(w.section_pins) > 1 else 'A'}; "
            f"each section draws {w.section_a:g} A hot and several times that at switch-on "
            f"({'--range high' if w.section_a * 8 > 3.1 else 'the low range suits'}).",
            markup=False, highlight=False)
        if r["caution"]:
            ui.warn(r["caution"])
    ui.emit(args, res, render)
    return 0


def cmd_calibrate(args) -> int:
    from ..tester import calibration
    from ..tester.ports import find_tester
    from ..logbook.store import Store
    port = args.port or find_tester()
    ref = calibration.Reference(args.ref, args.ref_tol / 100)
    if not 1.0 <= args.supply_v <= 55.0:
        raise GlowtraceError("--supply-v is your meter's reading of the heater supply, 1..55 V")
    simulated = port.startswith("glowsim://")
    loads = {"open": None, "reference": args.ref}
    steps = {
        "open": "Leave the socket EMPTY (no tube, no resistor). Both sections will be "
                "switched on briefly to read the channels' zero.",
        "reference": f"Fit the {args.ref:g} ohm reference across section A, and a second "
                     "one across section B for a dual socket (CT wiring). Each carries about "
                     "an amp for a second and gets warm: use 10 W or larger resistors with "
                     "short, firm leads.",
    }

    def before_step(step):
        if not args.json:
            ui.out.print(f"[bold]Step '{step}':[/] {steps[step]}")
        if not simulated and not args.yes:
            input("Press Enter when ready (Ctrl-C to stop)... ")

    def url_for_step(step):  # the simulated socket is set up by the URL
        return with_load(port, loads[step]) if simulated else port
    with calibration.fixture_testers(url_for_step, before_step) as get_tester:
        cal = calibration.run(get_tester, args.supply_v, args.meter_tol / 100, ref)
    with Store(db_path(args)) as store:
        store.save_calibration(cal)

    def render(c):
        ui.out.print(f"Calibration of {c['board']}, written to the board and "
                     f"{db_path(args)}", markup=False)
        gains_table(c)
    ui.emit(args, cal, render)
    from .. import safety
    hot = safety.hot_after(args.supply_v ** 2 / args.ref, "Each reference resistor")
    if hot and not args.json:
        ui.warn(hot)
    return 0


def cmd_selftest(args) -> int:
    from ..tester import selftest
    from ..tester.ports import find_tester
    port = args.port or find_tester()
    if port.startswith("glowsim://"):
        port = with_load(port, args.load_ohm)
    elif not args.yes and not args.json:
        ui.out.print(f"Fit the {args.load_ohm:g} ohm dummy load across section A (and section "
                  "B for a dual socket). It carries about an amp: use a power resistor.")
        input("Press Enter when ready... ")
    def show(c):
        if not args.json:
            line = Text("ok   ", style=ui.GOOD) if c.ok else Text("FAIL ", style=ui.BAD)
            line.append(f"{c.name}: {c.detail}")
            ui.out.print(line)
            if not c.ok and c.advice:
                ui.out.print(f"      -> {c.advice}", markup=False)
    with connect(port) as t:
        checks = selftest.run(t, args.load_ohm, show)
    failed = [c for c in checks if not c.ok]
    if args.json:
        ui.emit(args, {"passed": not failed, "checks": [c.as_dict() for c in checks]}, None)
    else:
        ui.out.print(f"{len(checks) - len(failed)} of {len(checks)} checks passed."
                  + ("" if not failed else " Fix the first failure first; later ones often follow from it."))
        from .. import safety
        # the supply the self-test read at the socket (6.3 V if it could not)
        volts = next((float(c.detail.split(" V")[0]) for c in checks
                      if c.name == "heater supply voltage" and c.ok), 6.3)
        hot = safety.hot_after(volts ** 2 / args.load_ohm, "The dummy load")
        if hot:
            ui.warn(hot)
    return 0 if not failed else 3


def cmd_firmware(args) -> int:
    from ..tester import firmware as firmware_install
    from ..tester.ports import find_tester, probe
    port = args.port or find_tester()
    if args.action == "version":
        hello = probe(port, timeout=args.wait_s or 3.0)
        if hello is None:
            raise GlowtraceError(f"no glowtrace firmware answered on {port}")
        res = {k: hello.get(k) for k in ("firmware", "protocol", "board", "reset_cause")}
        res["variant"] = (hello.get("frontend") or {}).get("variant", "30V")
        res["calibration"] = (hello.get("calibration") or {}).get("at") or "nominal"
        res["this_glowtrace_installs"] = firmware_install.firmware_version()
        ui.emit(args, res, lambda r: ui.out.print(
            f"{port}: firmware {r['firmware']} (protocol {r['protocol']}) on {r['board']}, "
            f"the {r['variant']} variant, "
            f"calibration {r['calibration']}; this glowtrace installs {r['this_glowtrace_installs']}"))
        return 0
    hello = firmware_install.install(port, progress=lambda m: ui.err.print(m),
                                     wait_s=args.wait_s or firmware_install.ANSWER_WAIT_S,
                                     variant=args.variant)
    ui.emit(args, {"port": port, "firmware": hello["firmware"], "board": hello["board"],
                   "variant": (hello.get("frontend") or {}).get("variant", "30V")},
            lambda r: ui.out.print(f"Installed firmware {r['firmware']} on {r['board']} ({port}), "
                                   f"the {r['variant']} variant's front-end numbers."))
    return 0


def register(sub, common) -> None:
    s = sub.add_parser("socket", parents=[common], help="which socket and wiring a type needs")
    s.add_argument("type")
    s.add_argument("--fitted", help="sockets your tester has, comma-separated "
                                    "(default: any of the reference design's)")
    s.add_argument("--variant", choices=["30V", "55V"],
                   help="your tester's variant (default: the one the heater needs)")
    s.set_defaults(func=cmd_socket)

    s = sub.add_parser("calibrate", parents=[common],
                       help="calibrate the tester with reference resistors")
    s.add_argument("--port", help="serial device or glowsim:// URL (default: found on USB)")
    s.add_argument("--supply-v", type=number(0, 60, above=True), required=True,
                   help="the heater supply at the empty socket, as your meter reads it")
    s.add_argument("--meter-tol", type=number(0, 50, above=True), default=0.5, help="meter tolerance, %% (0.5)")
    s.add_argument("--ref", type=number(0, 1e6, above=True), default=4.7,
                   help="the reference resistor's value, ohm (4.7)")
    s.add_argument("--ref-tol", type=number(0, 50, above=True), default=1.0, help="its tolerance, %% (1)")
    s.add_argument("--yes", action="store_true", help="do not wait for Enter between steps")
    s.set_defaults(func=cmd_calibrate)

    s = sub.add_parser("selftest", parents=[common], help="the tester checks itself")
    s.add_argument("--port")
    s.add_argument("--load-ohm", type=number(0, 1e6, above=True), default=4.7,
                   help="the dummy load fitted in each section, ohm (4.7)")
    s.add_argument("--yes", action="store_true", help="do not wait for Enter")
    s.set_defaults(func=cmd_selftest)

    s = sub.add_parser("firmware", parents=[common], help="install or query the firmware")
    s.add_argument("action", choices=["install", "version"])
    s.add_argument("--port", help="serial device (default: the board found on USB)")
    s.add_argument("--wait-s", type=number(0, 600, above=True),
                   help="how long to wait for the board's answer, s (default: 3 for version, "
                        "20 after an install's restart; more for an emulated board)")
    s.add_argument("--variant", choices=["30V", "55V"], default="30V",
                   help="the board's build: 30V (heaters to 30 V, the default) or 55V "
                        "(series-string heaters to 55 V; schematics/BUILD.md)")
    s.set_defaults(func=cmd_firmware)
