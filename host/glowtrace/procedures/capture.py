"""The capture procedure: open the port, identify, capture, store, analyse,
and leave the heater off whatever happens (Ctrl-C, a dropped link, a reset
board).

A capture that cannot be whole is still stored, marked incomplete with its
reason: nothing that arrived is thrown away."""

from .. import catalogue
from ..analysis.runner import analyze_stored
from ..tester.raw import RawCapture
from ..errors import GlowtraceError
from ..tester.sockets import check_for_tester, range_for
from ..logbook.recovery import load_unsaved, save_unsaved
from ..logbook.store import Store
from ..tester.driver import CaptureInterrupted, connect

STORE_WAIT_S = 60.0  # default wait for a logbook another program holds


# trips that stop a capture for the bench's sake, not the tube's: what is
# stored is a curve cut short, marked incomplete
BENCH_TRIPS = {"host_silent": "the tester stopped: the host went silent",
               "exception": "the tester stopped on a firmware error",
               "max_on_time": "the tester stopped at its maximum on-time"}


def mark_bench_trip(raw: RawCapture) -> None:
    """A curve the tester cut short for a reason that is not the tube (the
    host went silent, a firmware error, the maximum on-time) is incomplete,
    however whole its frames; what the link saw of it comes after."""
    cause = raw.trip_cause
    if cause in BENCH_TRIPS:
        raw.incomplete_reason = BENCH_TRIPS[cause] + (
            f"; then {raw.incomplete_reason}" if raw.incomplete_reason else "")


class CaptureNotStored(GlowtraceError):
    """The logbook could not take a finished capture: it is kept whole in a
    file (`path`) that `glowtrace recover` stores later."""

    def __init__(self, why: str, path, raw: RawCapture):
        super().__init__(f"{why}. The capture is kept whole in {path}: "
                         f"`glowtrace recover {path}` stores it once the logbook is free")
        self.path = path
        self.raw = raw


def store_or_keep(store: Store, raw: RawCapture, tube_type: str | None, notes: str | None,
                  wait_s: float, on_busy=None) -> None:
    """Store the capture, waiting up to wait_s for a busy logbook; if the
    logbook still cannot take it, keep it whole in an unsaved-capture file
    and raise CaptureNotStored naming that file. Nothing received is lost."""
    try:
        store.save_capture(raw, tube_type=tube_type, notes=notes, wait_s=wait_s,
                           on_busy=on_busy)
    except (GlowtraceError, KeyboardInterrupt) as e:
        why = str(e) if isinstance(e, GlowtraceError) else \
            f"interrupted while waiting for the logbook {store.path}"
        path = save_unsaved(raw, tube_type, notes, store.path, why)
        raise CaptureNotStored(why, path, raw) from None


def analyze_after_storing(store: Store, raw: RawCapture) -> dict:
    try:
        return analyze_stored(store, raw.uuid)
    except GlowtraceError as e:
        # the raw capture is safe; `glowtrace reanalyze` can try again
        return {"warnings": [f"analysis not stored ({e}): run `glowtrace reanalyze`"]}


class UserInterrupt(KeyboardInterrupt):
    """Ctrl-C during a capture, after the partial capture was stored."""

    def __init__(self, raw: RawCapture):
        super().__init__("interrupted")
        self.raw = raw
        self.off_confirmed = False


def _take(tester, tube: str, section: str, params: dict | None, progress,
          tube_type: str | None, started_at: str | None, should_stop=None) -> RawCapture:
    """The capture on a connected tester, checked for the type first; a
    capture the user interrupted comes back with its reason."""
    params = dict(params or {})
    if tube_type:
        kind = catalogue.load().get(tube_type)
        # refuse before switching on if this tester cannot wire the type
        check_for_tester(kind, section, tester.hello["frontend"])
        if params.get("range") is None:  # from the type, on this tester's ranges
            params["range"] = range_for(kind, tester.hello["frontend"])
    if params.get("range") is None:
        params["range"] = "low"
    try:
        raw = tester.capture(tube, section, params, progress, should_stop)
    except CaptureInterrupted as e:
        raw = e.raw
        raw.incomplete_reason = e.reason
    mark_bench_trip(raw)
    if started_at:
        raw.started_at = started_at
    return raw


def run_capture(port_url: str, store: Store, tube: str, section: str,
                params: dict | None = None, progress=None, tube_type: str | None = None,
                notes: str | None = None, started_at: str | None = None,
                store_wait_s: float = STORE_WAIT_S, on_busy=None,
                precheck=None) -> RawCapture:
    """started_at: back-dates the capture (only the demo uses it, to lay down
    its invented earlier visits). store_wait_s, on_busy: see store_or_keep.
    precheck(tester): run on the connected tester before switching on; it
    raises to refuse the tube (the bench session's cold-resistance check)."""
    with connect(port_url) as tester:
        try:
            if precheck:
                precheck(tester)
            raw = _take(tester, tube, section, params, progress, tube_type, started_at)
            if raw.incomplete_reason == "interrupted by the user":
                # the user wants out: heater off first, then store
                tester.abort()
            store_or_keep(store, raw, tube_type, notes, store_wait_s, on_busy)
            raw.analysis = analyze_after_storing(store, raw)
            if raw.incomplete_reason == "interrupted by the user":
                stop = UserInterrupt(raw)
                stop.off_confirmed = tester.ensure_off()
                raise stop
            return raw
        finally:
            tester.abort()  # idempotent on the firmware: heater off, whatever state


def capture_unstored(port_url: str, tube: str, section: str, params: dict | None = None,
                     started_at: str | None = None, tube_type: str | None = None,
                     progress=None, precheck=None, should_stop=None) -> RawCapture:
    """A capture taken and the tester left off, for a caller that stores it
    itself (the demo and the bench session with several testers, which run
    testers side by side and store through one writer). precheck: as in
    run_capture."""
    with connect(port_url) as tester:
        try:
            if precheck:
                precheck(tester)
            return _take(tester, tube, section, params, progress, tube_type, started_at,
                         should_stop)
        finally:
            tester.abort()


def capture_into_logbook(db_path, port_url: str | None, tube: str, section: str,
                         tube_type: str | None = None, params: dict | None = None,
                         progress=None, store_wait_s: float = STORE_WAIT_S,
                         on_busy=None) -> RawCapture:
    """`glowtrace capture`: everything checked that can be checked before the
    heater is switched on (the type known, the tube's recorded type and its
    sections agreeing), the tester found when no port is given, then
    run_capture into the logbook at db_path."""
    from pathlib import Path

    from ..logbook.records import check_capture_target
    from ..tester.ports import find_tester
    if tube_type:
        tube_type = catalogue.load().get(tube_type).name  # unknown type: stop here
    if Path(db_path).exists():  # a known tube: its type and sections must fit
        with Store(db_path) as store:
            kind = check_capture_target(store, tube, tube_type, section)
    else:
        kind = check_capture_target(None, tube, tube_type, section)
    with Store(db_path) as store:
        store.check_writable()  # before the heater runs, not after
        port = port_url or find_tester()
        return run_capture(port, store, tube, section, params, progress, tube_type=kind,
                           store_wait_s=store_wait_s, on_busy=on_busy)


def recover_into_logbook(db_path, files: list, wait_s: float = STORE_WAIT_S,
                         on_busy=None) -> list[dict]:
    """`glowtrace recover`: store captures kept in unsaved-capture files,
    analyse them, and remove each file once its capture is in the logbook.
    A capture already there is not stored twice."""
    from pathlib import Path
    loaded = [(Path(f), *load_unsaved(f)) for f in files]  # every file checked first
    out = []
    with Store(db_path) as store:
        store.check_writable()
        for path, raw, tube_type, notes in loaded:
            there = store.db.execute("SELECT 1 FROM captures WHERE uuid = ?",
                                     [raw.uuid]).fetchone()
            if not there:
                store.save_capture(raw, tube_type=tube_type, notes=notes, wait_s=wait_s,
                                   on_busy=on_busy)
                raw.analysis = analyze_after_storing(store, raw)
            path.unlink()
            out.append({"file": str(path), "capture": raw.uuid, "tube": raw.tube,
                        "stored": not there, "complete": raw.complete})
    return out
