"""A bench session: a box of tubes of one type captured one after another.

Set once: the type, the sections, the range, the lot or owner and the labels
(a pattern numbered on, B7-### giving B7-001, B7-002, ..., or typed/scanned
per tube). Per tube: a prompt to insert it, a brief cold-resistance reading
that refuses a tube still warm from the last run, open or shorted, then the
capture, stored and judged, and a one-line result. Everything finished is in
the logbook whatever ends the session (the stop key, Ctrl-C, an error).

The prompts and the output go through `ask` and `say` callables, so the
command drives a terminal and the tests drive a script."""

import math
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
    ports: list                    # one tester, or several side by side
    type_name: str
    section: str | None = None     # None: every section of the type
    range_name: str | None = None  # None: from the type
    lot: str | None = None
    pattern: LabelPattern | None = None  # None: each label typed (or scanned)
    count: int | None = None       # stop after this many tubes
    max_s: float = 60.0
    room_c: float = 22.0
    unattended: bool = False       # no prompts: each question takes its unattended answer


class Writer:
    """The session's one connection to the logbook: every read and write of
    the session goes through call(fn, *args), which runs fn(store, *args) in
    the writer's own thread when testers run side by side (so no two
    threads ever write at once), or at once otherwise."""

    def __init__(self, db_path, threaded: bool):
        import queue
        import threading
        from ..logbook.store import Store
        self.threaded = threaded
        self._open = lambda: Store(db_path)
        if not threaded:
            self.store = self._open()
            self.store.check_writable()
            return
        self._jobs: "queue.Queue" = queue.Queue()
        ready = queue.Queue()
        self._thread = threading.Thread(target=self._serve, args=(ready,), daemon=True)
        self._thread.start()
        err = ready.get()
        if err:
            raise err

    def _serve(self, ready):
        try:
            self.store = self._open()
            self.store.check_writable()
        except Exception as e:  # noqa: BLE001 - handed to the caller
            ready.put(e)
            return
        ready.put(None)
        while True:
            job = self._jobs.get()
            if job is None:
                break
            fn, args, fut = job
            try:
                fut.set_result(fn(self.store, *args))
            except BaseException as e:  # noqa: BLE001 - raised again in the caller
                fut.set_exception(e)
        self.store.close()

    def call(self, fn, *args):
        if not self.threaded:
            return fn(self.store, *args)
        from concurrent.futures import Future
        fut: Future = Future()
        self._jobs.put((fn, args, fut))
        return fut.result()

    def close(self):
        if self.threaded:
            self._jobs.put(None)
            self._thread.join(30)
        else:
            self.store.close()


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


class TypeDiffers(GlowtraceError):
    pass


def _prepare(store, label: str, kind, lot: str | None) -> tuple[float, str]:
    """The tube's record (made if new, under the lot) and its expected cold
    resistance; in the writer."""
    from ..logbook import records
    tube = records.get_tube(store, label)
    if tube is None:
        records.add_tube(store, label, kind.name, owner=lot)
    elif tube["type"] and tube["type"] != kind.name:
        raise TypeDiffers(f"{label} is recorded as a {tube['type']}, not a {kind.name}")
    return expected_cold_ohm(store, kind, label)


def _store_and_judge(store, raw, type_name: str, cfg: dict) -> TubeResult:
    """Store the capture (nothing lost: a logbook that stays busy leaves it
    in a file for `glowtrace recover`), analyse it, and judge the tube."""
    from ..judgement import scoring
    from .capture import CaptureNotStored, analyze_after_storing, store_or_keep, STORE_WAIT_S
    try:
        store_or_keep(store, raw, type_name, None, STORE_WAIT_S)
    except CaptureNotStored as e:
        return TubeResult(raw.tube, "not stored", note=str(e))
    raw.analysis = analyze_after_storing(store, raw)
    if not raw.complete:
        return TubeResult(raw.tube, "incomplete", note=raw.incomplete_reason or "")
    a = scoring.history(store, raw.tube, cfg)
    return TubeResult(raw.tube, "captured", a["status"], a["grade"], _figures(raw))


class _Bench:
    """What the testers of one session share: the type, the labels, the
    results, the prompt (one at a time on the terminal) and the stop."""

    def __init__(self, session: Session, ask, say, writer: Writer, kind, lot):
        import threading
        self.s = session
        self.ask_raw, self.say = ask, say
        self.writer = writer
        self.kind = kind
        self.section = session.section or sections_for(kind)
        self.lot = lot
        self.results: list[TubeResult] = []
        self.started = 0
        self.lock = threading.Lock()
        self.ask_lock = threading.Lock()
        self.stop = threading.Event()
        self.asking: set = set()

    def ask(self, who: str, prompt: str, unattended: str) -> str:
        """The user's answer; in an unattended session (a jig, the simulated
        tester) the question's own answer for that case, no prompt."""
        if self.s.unattended:
            if self.stop.is_set():
                raise EOFError
            return unattended
        with self.ask_lock:
            if self.stop.is_set():
                raise EOFError
            self.asking.add(who)
            try:
                return self.ask_raw(prompt)
            finally:
                self.asking.discard(who)

    def record(self, r: TubeResult, prefix: str) -> None:
        with self.lock:
            self.results.append(r)
        self.say(prefix + _one_line(r))

    def next_label(self, who: str, prefix: str) -> str | None:
        with self.lock:
            if self.s.count is not None and self.started >= self.s.count:
                return None
            self.started += 1
            if self.s.pattern:
                return self.s.pattern.next()
        label = self.ask(who, prefix + "Label of the next tube (scan or type; empty to stop): ",
                         "").strip()
        return label or None


def _tester_loop(bench: _Bench, port: str, who: str, prefix: str, progress) -> None:
    """One tester's tubes, one after another, until the labels run out, the
    user stops, or the tester fails."""
    from .. import config
    from .capture import capture_unstored
    cfg = config.load(None)
    label = None
    retry = False
    last = None    # this tester's last tube, for a retest
    resume = None  # the label to come back to after a retest
    while not bench.stop.is_set():
        try:
            if not retry:
                label = bench.next_label(who, prefix)
                if label is None:
                    return
            retry = False
            kind, section = bench.kind, bench.section
            answer = bench.ask(who, f"{prefix}Insert {label} ({kind.name}, section {section}) "
                               "and press Enter; s skip, t TYPE change type, "
                               + (f"r retest {last}, " if last else "") + "q stop: ", "").strip()
        except (EOFError, KeyboardInterrupt):
            bench.stop.set()
            return
        if answer.lower() == "q":
            bench.stop.set()
            return
        if answer.lower() == "s":
            bench.record(TubeResult(label, "skipped"), prefix)
            continue
        if answer.lower() == "r":
            if last is None:
                bench.say(f"{prefix}nothing to retest yet")
                retry = True
                continue
            # the last tube again; this label's prompt comes back after it
            resume, label = label, last
            bench.ask(who, f"{prefix}Put {label} back in and press Enter: ", "")
        if answer.lower().startswith("t "):
            try:
                new = catalogue.load().get(answer[2:].strip())
            except GlowtraceError as e:
                bench.say(prefix + str(e))
            else:
                with bench.lock:
                    bench.kind = new
                    bench.section = bench.s.section or sections_for(new)
                bench.say(f"{prefix}type now {new.name}, section {bench.section}")
            retry = True
            continue
        try:
            expected, source = bench.writer.call(_prepare, label, kind, bench.lot)
        except TypeDiffers as e:
            bench.record(TubeResult(label, "skipped", note=str(e)), prefix)
            continue

        def precheck(tester, kind=kind, section=section, expected=expected, source=source):
            from ..tester.sockets import range_for
            fe = tester.hello["frontend"]
            rng = bench.s.range_name or range_for(kind, fe)
            reading = cold_reading(tester, section, rng)
            judge_cold(reading, kind, expected, source, bench.s.room_c,
                       fe["adc"]["vref_v"] * fe["current_ranges"][rng]["amps_per_volt"])
        params = {"range": bench.s.range_name, "max_s": bench.s.max_s}
        try:
            raw = capture_unstored(port, label, section, params, tube_type=kind.name,
                                   progress=progress, precheck=precheck,
                                   should_stop=bench.stop.is_set)
        except Refused as e:
            bench.say(f"{prefix}{label}: refused before switch-on: {e}")
            try:
                again = bench.ask(who, f"{prefix}Retest {label}? Enter when ready, s to skip "
                                  "it, q to stop: ", "s").strip().lower()  # unattended: skip
            except (EOFError, KeyboardInterrupt):
                again = "q"
            if again in ("s", "q"):
                bench.record(TubeResult(label, "refused", note=f"{e.kind}: {e}"), prefix)
                if again == "q":
                    bench.stop.set()
                    return
            else:
                retry = True  # the same tube, same label, once it has cooled
            continue
        except GlowtraceError as e:  # the tester itself: gone, not answering
            bench.record(TubeResult(label, "error", note=str(e)), prefix)
            bench.say(f"{prefix}this tester stops; the others go on")
            return
        result = bench.writer.call(_store_and_judge, raw, kind.name, cfg)
        bench.record(result, prefix)
        if raw.incomplete_reason == "interrupted by the user":
            bench.stop.set()
            return
        last = label
        if resume is not None:
            label, resume, retry = resume, None, True


def run(session: Session, ask, say, progress_for=None) -> list[TubeResult]:
    """The session: one loop per tester, side by side when there are several.
    ask(prompt) -> the user's answer (EOFError or KeyboardInterrupt stop);
    say(text) shows a line; progress_for(tester name) -> a capture progress
    callback or None. Every finished tube is stored when it returns."""
    import threading
    import time
    from ..logbook import records
    if not session.ports:
        raise GlowtraceError("no tester to run the session on")
    kind = catalogue.load().get(session.type_name)
    several = len(session.ports) > 1
    writer = Writer(session.db_path, threaded=several)
    try:
        lot = None
        if session.lot:
            def make_lot(store):
                if not records.get_owner(store, session.lot):
                    records.add_owner(store, session.lot, notes="lot (bench session)")
                return records.require_owner(store, session.lot)["name"]
            lot = writer.call(make_lot)
        bench = _Bench(session, ask, say, writer, kind, lot)
        names = [str(n) for n in range(1, len(session.ports) + 1)]

        def prog(who):
            return progress_for(who) if progress_for else None
        if not several:
            try:
                _tester_loop(bench, session.ports[0], "1", "", prog("1"))
            except KeyboardInterrupt:
                bench.stop.set()
            return bench.results
        threads = [threading.Thread(target=_tester_loop, daemon=True,
                                    args=(bench, port, who, f"[{who}] ", prog(who)))
                   for port, who in zip(session.ports, names)]
        for t in threads:
            t.start()
        try:
            while any(t.is_alive() for t in threads):
                time.sleep(0.1)
        except KeyboardInterrupt:
            bench.stop.set()
            # the testers that are capturing stop and store what they have;
            # one waiting at the prompt is not waited for
            deadline = time.monotonic() + 60
            while time.monotonic() < deadline and any(
                    t.is_alive() and who not in bench.asking for t, who in zip(threads, names)):
                time.sleep(0.1)
        return bench.results
    finally:
        writer.close()
