"""A bench session: a box of tubes of one type captured one after another.

Set once: the type, the sections, the range, the lot or owner and the labels
(a pattern numbered on, B7-### giving B7-001, B7-002, ..., or typed/scanned
per tube). Per tube: a prompt to insert it, a brief cold-resistance reading
that refuses a tube still warm from the last run, open or shorted, then the
capture, stored and judged, and a one-line result. Everything finished is in
the logbook whatever ends the session (the stop key, Ctrl-C, an error).

The prompts and the output go through `ask` and `say` callables, so the
command drives a terminal and the tests drive a script."""

import re
from dataclasses import dataclass, field

from .. import catalogue
from ..errors import GlowtraceError
from ..tester.calibration import gain_offset, nominal_scale

# the pre-check: heater on for about 4 ms (1 ms to settle, 12 sets of 250 us)
PRECHECK = {"sets": 12, "interval_us": 250, "oversample": 4, "settle_ms": 1}
# a tube's expected cold resistance, and how far above it counts as warm:
# its own last reading, the median of its type in the logbook (3 tubes or
# more), or the catalogue's rated hot resistance over a typical hot/cold
# ratio of an oxide-cathode heater (about 6.5; from memory, a rough guide,
# hence the wide margin)
WARM_MARGIN = {"own": 0.06, "type": 0.12, "catalogue": 0.35}
TYPICAL_HOT_COLD = 6.5
TUNGSTEN_ALPHA = 0.0045  # per K near room temperature (tungsten tables, data/)
# cooling: the excess resistance falls off about exponentially; these time
# constants are our rough estimates (a small heater inside glass about a
# minute, a power tube's several), used only to say how long to wait
COOL_TAU_S = ((5.0, 60.0), (20.0, 150.0), (float("inf"), 300.0))  # (heater W up to, tau)


class PatternError(GlowtraceError):
    pass


class Refused(GlowtraceError):
    """The pre-check refused the tube: kind is warm, open or short."""

    def __init__(self, kind: str, message: str, wait_s: float | None = None):
        super().__init__(message)
        self.kind = kind
        self.wait_s = wait_s


class LabelPattern:
    """Labels numbered on from a pattern with a run of # (B7-### -> B7-001)."""

    def __init__(self, pattern: str, start: int = 1):
        m = list(re.finditer(r"#+", pattern))
        if len(m) != 1:
            raise PatternError(f"label pattern {pattern!r} needs one run of # for the number, "
                               "e.g. B7-### (or --scan to type each label)")
        self.head, self.tail = pattern[:m[0].start()], pattern[m[0].end():]
        self.width = m[0].end() - m[0].start()
        if start < 0:
            raise PatternError("the first number must be 0 or more")
        self.n = start

    def next(self) -> str:
        label = f"{self.head}{self.n:0{self.width}d}{self.tail}"
        self.n += 1
        return label


def sections_for(kind) -> str:
    """Every section of the type: both halves of a centre-tapped heater."""
    return "AB" if kind.centre_tapped else "A"


def expected_cold_ohm(store, kind, label: str) -> tuple[float, str]:
    """(expected cold resistance of one section at 20 C, where it comes from)."""
    row = store.db.execute(
        "SELECT m.cold_resistance_20c_ohm FROM section_metrics m JOIN captures c "
        "ON c.uuid = m.capture_uuid WHERE c.tube = ? AND m.cold_start_ok = 1 AND "
        "m.cold_resistance_20c_ohm IS NOT NULL ORDER BY c.started_at DESC LIMIT 1",
        [label]).fetchone()
    if row:
        return float(row[0]), "own"
    vals = sorted(r[0] for r in store.db.execute(
        "SELECT m.cold_resistance_20c_ohm FROM section_metrics m JOIN captures c "
        "ON c.uuid = m.capture_uuid JOIN tubes t ON t.label = c.tube WHERE t.type = ? "
        "AND m.cold_start_ok = 1 AND m.cold_resistance_20c_ohm IS NOT NULL "
        "AND m.current = 1", [kind.name]))
    if len(vals) >= 3:
        return vals[len(vals) // 2], "type"
    r = kind.section_rating()
    return r.volts / r.amps / TYPICAL_HOT_COLD, "catalogue"


def cool_wait_s(kind, excess: float) -> float:
    """About how long a heater this much above its cold resistance takes to
    come within 2 % of it."""
    watts = kind.section_rating().watts * (2 if kind.centre_tapped else 1)
    tau = next(t for w, t in COOL_TAU_S if watts <= w)
    import math
    return tau * math.log(max(excess, 0.021) / 0.02)


def cold_reading(tester, section: str, range_name: str) -> dict:
    """Each switched section's resistance (ohm) from a brief reading with
    the heater on, against a reading with it off (the zero)."""
    hello = tester.hello
    fe, cal = hello["frontend"], hello.get("calibration")
    off = tester.measure("", range_name, **PRECHECK)
    on = tester.measure(section, range_name, **PRECHECK)
    chans = on["channels"]
    g, o = gain_offset(cal, "v", range_name)
    volts = (on["means"][chans.index("v")] - o) * nominal_scale(fe, "v", range_name) * g
    out = {"tripped": bool(on["tripped"]), "volts": volts, "amps": {}, "ohm": {}}
    for s in section:
        name = "i" + s.lower()
        i = chans.index(name)
        g, _ = gain_offset(cal, name, range_name)
        amps = (on["means"][i] - off["means"][i]) * nominal_scale(fe, name, range_name) * g
        out["amps"][s] = amps
        out["ohm"][s] = volts / amps if amps > 0 else float("inf")
    return out


def judge_cold(reading: dict, kind, expected: float, source: str, room_c: float,
               full_scale_a: float) -> None:
    """Raise Refused for a tube that is shorted, open or still warm."""
    if reading["tripped"]:
        raise Refused("short", "the heater drew more than the range allows: shorted, or "
                      "the wrong type or range; not switched on")
    at_room = expected * (1 + TUNGSTEN_ALPHA * (room_c - 20.0))
    for s, amps in reading["amps"].items():
        r = reading["ohm"][s]
        if amps < 0.02 * full_scale_a:
            raise Refused("open", f"section {s} draws no current: an open heater or a bad "
                          "contact in the socket; reseat it and retest")
        if r < at_room / 4:
            raise Refused("short", f"section {s} reads {r:.3g} ohm cold, under a quarter of "
                          f"the {at_room:.3g} ohm expected: a shorted heater or wiring")
        excess = r / at_room - 1
        if excess > WARM_MARGIN[source]:
            wait = cool_wait_s(kind, excess)
            raise Refused("warm", f"section {s} reads {r:.3g} ohm, {100 * excess:.0f} % above "
                          f"the {at_room:.3g} ohm expected cold ({source} figure): still warm. "
                          f"Let it cool about {wait / 60:.0f} min and retest", wait)


@dataclass
class TubeResult:
    label: str
    outcome: str            # captured, refused, skipped, incomplete
    status: str | None = None
    grade: str | None = None
    figures: dict = field(default_factory=dict)
    note: str = ""


@dataclass
class Session:
    """What is set once for the box."""
    db_path: object
    port: str
    type_name: str
    section: str | None = None     # None: every section of the type
    range_name: str | None = None  # None: from the type
    lot: str | None = None
    pattern: LabelPattern | None = None  # None: each label typed (or scanned)
    count: int | None = None       # stop after this many tubes
    max_s: float = 60.0
    room_c: float = 22.0


def _one_line(r: TubeResult) -> str:
    if r.outcome != "captured":
        return f"{r.label}: {r.outcome}" + (f" ({r.note})" if r.note else "")
    figs = "  ".join(f"{k} {v}" for k, v in r.figures.items())
    return f"{r.label}: {r.status}, grade {r.grade or '-'}  {figs}"


def _figures(raw) -> dict:
    """The one-line result's key figures, with units."""
    out = {}
    for sec, m in ((raw.analysis or {}).get("sections") or {}).items():
        if m.get("rated_hot_current_a") is not None:
            out[f"I{sec}"] = f"{m['rated_hot_current_a']:.4g} A"
        if m.get("rated_warmup_90_s") is not None:
            out[f"w90{sec}"] = f"{m['rated_warmup_90_s']:.3g} s"
        if m.get("flash_index") is not None:
            out[f"flash{sec}"] = f"{m['flash_index']:.2g}"
    return out


def run(session: Session, ask, say, progress=None) -> list[TubeResult]:
    """The session's loop. ask(prompt) -> the user's answer (raises
    EOFError or KeyboardInterrupt to stop); say(text) shows a line."""
    from .. import config
    from ..judgement import scoring
    from ..logbook import records
    from ..logbook.store import Store
    from ..tester.calibration import nominal_scale  # noqa: F401 (import checked early)
    from .capture import UserInterrupt, run_capture
    kind = catalogue.load().get(session.type_name)
    section = session.section or sections_for(kind)
    cfg = config.load(None)
    results: list[TubeResult] = []
    with Store(session.db_path) as store:
        store.check_writable()
        if session.lot and not records.get_owner(store, session.lot):
            records.add_owner(store, session.lot, notes="lot (bench session)")
        lot = records.require_owner(store, session.lot)["name"] if session.lot else None
        label = None
        retry = False
        while session.count is None or len(results) < session.count:
            try:
                if not retry:
                    if session.pattern:
                        label = session.pattern.next()
                    else:
                        label = ask("Label of the next tube (scan or type; empty to stop): "
                                    ).strip()
                        if not label:
                            break
                retry = False
                answer = ask(f"Insert {label} ({kind.name}, section {section}) and press Enter; "
                             "s skip, t TYPE change type, q stop: ").strip()
            except (EOFError, KeyboardInterrupt):
                break
            if answer.lower() == "q":
                break
            if answer.lower() == "s":
                results.append(TubeResult(label, "skipped"))
                say(_one_line(results[-1]))
                continue
            if answer.lower().startswith("t "):
                try:
                    kind = catalogue.load().get(answer[2:].strip())
                except GlowtraceError as e:
                    say(str(e))
                    retry = True
                    continue
                section = session.section or sections_for(kind)
                say(f"type now {kind.name}, section {section}")
                retry = True
                continue
            tube = records.get_tube(store, label)
            if tube is None:
                records.add_tube(store, label, kind.name, owner=lot)
            elif tube["type"] and tube["type"] != kind.name:
                say(f"{label} is recorded as a {tube['type']}, not a {kind.name}: skipped")
                results.append(TubeResult(label, "skipped", note="type differs from the record"))
                continue
            expected, source = expected_cold_ohm(store, kind, label)

            def precheck(tester):
                from ..tester.sockets import range_for
                rng = session.range_name or range_for(kind, tester.hello["frontend"])
                fe = tester.hello["frontend"]
                reading = cold_reading(tester, section, rng)
                judge_cold(reading, kind, expected, source, session.room_c,
                           fe["adc"]["vref_v"] * fe["current_ranges"][rng]["amps_per_volt"])
            params = {"range": session.range_name, "max_s": session.max_s}
            try:
                raw = run_capture(session.port, store, label, section, params, progress,
                                  tube_type=kind.name, precheck=precheck)
            except Refused as e:
                say(f"{label}: refused before switch-on: {e}")
                try:
                    again = ask(f"Retest {label}? Enter when ready, s to skip it, q to stop: "
                                ).strip().lower()
                except (EOFError, KeyboardInterrupt):
                    again = "q"
                if again in ("s", "q"):
                    results.append(TubeResult(label, "refused", note=f"{e.kind}: {e}"))
                    say(_one_line(results[-1]))
                    if again == "q":
                        break
                else:
                    retry = True  # the same tube, same label, once it has cooled
                continue
            except UserInterrupt as e:
                results.append(TubeResult(label, "incomplete", note="interrupted; stored"))
                say(_one_line(results[-1]) + (" (heater off)" if e.off_confirmed else ""))
                break
            if not raw.complete:
                results.append(TubeResult(label, "incomplete", note=raw.incomplete_reason))
            else:
                a = scoring.history(store, label, cfg)
                results.append(TubeResult(label, "captured", a["status"], a["grade"],
                                          _figures(raw)))
            say(_one_line(results[-1]))
    return results
