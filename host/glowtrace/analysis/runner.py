"""Analysis of stored captures: right after a capture, and again whenever the
analysis improves (`glowtrace reanalyze`)."""

from .. import catalogue, config
from ..tester.calibration import age_warning
from ..errors import GlowtraceError, StoreError
from ..logbook.store import Store
from . import ANALYSIS_VERSION
from .analyze import analyze_capture, analyze_curve
from .csvio import curve_from_rows


def _max_cal_age() -> float:
    # a broken settings file is the user's to fix: said, not silently replaced
    return float(config.load()["calibration"]["max_age_days"])


def _tube_type(store: Store, label: str | None, notes: list):
    tube = store.tube(label) if label else None
    if tube and tube.get("type"):
        try:
            return catalogue.load().get(tube["type"])
        except catalogue.UnknownType as e:
            notes.append(f"type not in the catalogue, ratings unknown: {e}")
    return None


def not_analysed(reason: str) -> dict:
    """The analysis record of a capture that could not be analysed: stored
    like any other, so the capture is shown, left out of scoring with its
    reason, and not retried until the analysis version changes."""
    return {"analysis_version": ANALYSIS_VERSION, "sections": {},
            "section_imbalance": None, "not_analysed": reason,
            "warnings": [f"not analysed: {reason}"]}


def analyze_stored(store: Store, uuid: str, max_cal_age: float | None = None) -> dict:
    """Analyse one stored capture with its tube's type and history; store it.
    max_cal_age: days a calibration stays good (default: the scoring settings).
    A capture that cannot be analysed (a record lost on the link, a curve no
    heater makes, a fault in the analysis itself) is stored as not analysed,
    with the reason: one bad capture never blocks the rest of the logbook."""
    if max_cal_age is None:  # outside the try: the settings are not the capture's fault
        max_cal_age = _max_cal_age()
    try:
        return _analyze(store, uuid, max_cal_age)
    except StoreError:
        raise  # the logbook itself: nothing to record the reason in
    except Exception as e:  # noqa: BLE001 - any fault of one capture's analysis
        reason = str(e) if isinstance(e, GlowtraceError) else f"{type(e).__name__}: {e}"
        result = not_analysed(reason)
        store.save_analysis(uuid, result)
        return result


def _analyze(store: Store, uuid: str, max_cal_age: float | None) -> dict:
    if store.capture_source(uuid) == "import":
        return _analyze_imported(store, uuid)
    raw = store.load_capture(uuid)
    notes: list[str] = []
    tube_type = _tube_type(store, raw.tube, notes)
    history = {sec: store.history_cold_r20(raw.tube, sec, raw.started_at)
               for sec in raw.section} if raw.tube else {}
    if not raw.blocks:
        result = {"analysis_version": ANALYSIS_VERSION, "sections": {},
                  "section_imbalance": None, "warnings": ["no samples to analyse"]}
    elif not raw.channels:
        result = not_analysed("the capture's start record was lost on the link: its "
                              "channels and current range are unknown")
    else:
        result = analyze_capture(raw, tube_type, history)
    if not raw.complete:
        notes.append(f"capture incomplete ({raw.incomplete_reason}): figures may be partial")
    stale = age_warning(raw.hello.get("calibration"), raw.started_at, max_cal_age)
    if stale:
        notes.append(stale)
    if notes:
        result["warnings"] = result.get("warnings", []) + notes
    store.save_analysis(uuid, result)
    return result


def _analyze_imported(store: Store, uuid: str) -> dict:
    row, names, n, rows = store.imported_rows(uuid)
    sec = row["section"]
    curve, notes = curve_from_rows(rows, n, names, f"{row['tube']} {sec}")
    tube_type = _tube_type(store, row["tube"], notes)
    hist = store.history_cold_r20(row["tube"], sec, row["started_at"]) if row["tube"] else None
    try:
        m = analyze_curve(curve, row["ambient_c"], tube_type, history_cold_r20=hist)
    except ValueError as e:
        m = {"warnings": [f"not analysed: {e}"], "analysis_version": ANALYSIS_VERSION}
    result = {"analysis_version": ANALYSIS_VERSION, "sections": {sec: m},
              "section_imbalance": None}
    if notes:
        result["warnings"] = notes
    store.save_analysis(uuid, result)
    return result


def reanalyze(store: Store, force: bool = False, progress=None) -> tuple[list, dict]:
    """Run the current analysis on every capture that lacks it (all with
    force), oldest first so each sees its own history. Returns (the UUIDs
    analysed, {uuid: reason} of those that could not be)."""
    todo = store.uuids_needing_analysis(ANALYSIS_VERSION, force)
    max_age = _max_cal_age()  # the settings once, not once per capture
    failed = {}
    for n, uuid in enumerate(todo, 1):
        result = analyze_stored(store, uuid, max_age)
        if result.get("not_analysed"):
            failed[uuid] = result["not_analysed"]
        if progress:
            progress(n, len(todo))
    return todo, failed
