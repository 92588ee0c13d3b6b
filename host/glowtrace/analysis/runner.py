"""Analysis of stored captures: right after a capture, and again whenever the
analysis improves (`glowtrace reanalyze`)."""

from .. import catalogue
from ..errors import GlowtraceError
from ..store import Store
from . import ANALYSIS_VERSION
from .analyze import analyze_capture


def analyze_stored(store: Store, uuid: str) -> dict:
    """Analyse one stored capture with its tube's type and history; store it."""
    raw = store.load_capture(uuid)
    tube = store.tube(raw.tube) if raw.tube else None
    tube_type, notes = None, []
    if tube and tube.get("type"):
        try:
            tube_type = catalogue.load().get(tube["type"])
        except GlowtraceError as e:
            notes.append(f"type not in the catalogue, ratings unknown: {e}")
    history = {sec: store.history_cold_r20(raw.tube, sec, raw.started_at)
               for sec in raw.section} if raw.tube else {}
    if not raw.blocks:
        result = {"analysis_version": ANALYSIS_VERSION, "sections": {},
                  "section_imbalance": None, "warnings": ["no samples to analyse"]}
    else:
        result = analyze_capture(raw, tube_type, history)
    if not raw.complete:
        notes.append(f"capture incomplete ({raw.incomplete_reason}): figures may be partial")
    if notes:
        result["warnings"] = result.get("warnings", []) + notes
    store.save_analysis(uuid, result)
    return result


def reanalyze(store: Store, force: bool = False, progress=None) -> list[str]:
    """Run the current analysis on every capture that lacks it (all with
    force), oldest first so each sees its own history."""
    todo = store.uuids_needing_analysis(ANALYSIS_VERSION, force)
    for n, uuid in enumerate(todo, 1):
        analyze_stored(store, uuid)
        if progress:
            progress(n, len(todo))
    return todo
