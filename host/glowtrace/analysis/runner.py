"""Analysis of stored captures: right after a capture, and again whenever the
analysis improves (`glowtrace reanalyze`)."""

from .. import catalogue, config
from ..tester.calibration import age_warning
from ..errors import GlowtraceError
from ..logbook.store import Store
from . import ANALYSIS_VERSION
from .analyze import analyze_capture, analyze_curve
from .curve import Curve


def _max_cal_age() -> float:
    try:
        return float(config.load()["calibration"]["max_age_days"])
    except GlowtraceError:
        return 180.0


def _tube_type(store: Store, label: str | None, notes: list):
    tube = store.tube(label) if label else None
    if tube and tube.get("type"):
        try:
            return catalogue.load().get(tube["type"])
        except GlowtraceError as e:
            notes.append(f"type not in the catalogue, ratings unknown: {e}")
    return None


def analyze_stored(store: Store, uuid: str, max_cal_age: float | None = None) -> dict:
    """Analyse one stored capture with its tube's type and history; store it.
    max_cal_age: days a calibration stays good (default: the scoring settings)."""
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
    else:
        result = analyze_capture(raw, tube_type, history)
    if not raw.complete:
        notes.append(f"capture incomplete ({raw.incomplete_reason}): figures may be partial")
    if max_cal_age is None:
        max_cal_age = _max_cal_age()
    stale = age_warning(raw.hello.get("calibration"), raw.started_at, max_cal_age)
    if stale:
        notes.append(stale)
    if notes:
        result["warnings"] = result.get("warnings", []) + notes
    store.save_analysis(uuid, result)
    return result


def _analyze_imported(store: Store, uuid: str) -> dict:
    row, cols = store.load_imported(uuid)
    notes: list[str] = []
    tube_type = _tube_type(store, row["tube"], notes)
    sec = row["section"]
    curve = Curve(cols["time_s"], cols["volts"], cols["amps"], cols.get("light"),
                  label=f"{row['tube']} {sec}")
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


def reanalyze(store: Store, force: bool = False, progress=None) -> list[str]:
    """Run the current analysis on every capture that lacks it (all with
    force), oldest first so each sees its own history."""
    todo = store.uuids_needing_analysis(ANALYSIS_VERSION, force)
    max_age = _max_cal_age()  # the settings once, not once per capture
    for n, uuid in enumerate(todo, 1):
        analyze_stored(store, uuid, max_age)
        if progress:
            progress(n, len(todo))
    return todo
