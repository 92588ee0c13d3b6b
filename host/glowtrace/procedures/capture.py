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
from ..logbook.store import Store
from ..tester.driver import CaptureInterrupted, connect


# trips that stop a capture for the bench's sake, not the tube's: what is
# stored is a curve cut short, marked incomplete
BENCH_TRIPS = {"host_silent": "the tester stopped: the host went silent",
               "exception": "the tester stopped on a firmware error",
               "max_on_time": "the tester stopped at its maximum on-time"}


class UserInterrupt(KeyboardInterrupt):
    """Ctrl-C during a capture, after the partial capture was stored."""

    def __init__(self, raw: RawCapture):
        super().__init__("interrupted")
        self.raw = raw
        self.off_confirmed = False


def run_capture(port_url: str, store: Store, tube: str, section: str,
                params: dict | None = None, progress=None, tube_type: str | None = None,
                notes: str | None = None, started_at: str | None = None) -> RawCapture:
    """started_at: back-dates the capture (only the demo uses it, to lay down
    its invented earlier visits)."""
    with connect(port_url) as tester:
        try:
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
                raw = tester.capture(tube, section, params, progress)
            except CaptureInterrupted as e:
                raw = e.raw
                raw.incomplete_reason = e.reason
            cause = (raw.trip or {}).get("cause")
            if cause in BENCH_TRIPS and raw.incomplete_reason is None:
                # the curve was cut short for a reason that is not the tube
                raw.incomplete_reason = BENCH_TRIPS[cause]
            if started_at:
                raw.started_at = started_at
            store.save_capture(raw, tube_type=tube_type, notes=notes)
            try:
                raw.analysis = analyze_stored(store, raw.uuid)
            except (GlowtraceError, ValueError) as e:
                # the raw capture is safe; `glowtrace reanalyze` can try again
                raw.analysis = {"warnings": [f"analysis failed: {e}"]}
            if raw.incomplete_reason == "interrupted by the user":
                stop = UserInterrupt(raw)
                stop.off_confirmed = tester.ensure_off()
                raise stop
            return raw
        finally:
            tester.abort()  # idempotent on the firmware: heater off, whatever state


def capture_into_logbook(db_path, port_url: str | None, tube: str, section: str,
                         tube_type: str | None = None, params: dict | None = None,
                         progress=None) -> RawCapture:
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
    port = port_url or find_tester()
    with Store(db_path) as store:
        return run_capture(port, store, tube, section, params, progress, tube_type=kind)
