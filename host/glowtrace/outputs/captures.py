"""A stored capture as a person reads it: its summary (raw facts and key
figures), with the tester's details for a tester capture and the file it came
from for an imported one."""

from ..logbook.store import Store
from ..tester.convert import KEY_FIGURES, summary


def stored_summary(store: Store, uuid: str) -> tuple[dict, dict | None]:
    """(summary, the whole analysis or None) of the capture with this UUID."""
    analysis = store.analysis(uuid)
    if store.capture_source(uuid) == "import":
        row = store.db["captures"].get(uuid)
        s = {k: row[k] for k in ("uuid", "tube", "section", "started_at", "ambient_c",
                                 "n_sets")}
        s.update(source="import", file=row["port"])
        secs = (analysis or {}).get("sections", {})
        s["analysis"] = {sec: {k: m.get(k) for k in KEY_FIGURES if k in m}
                         for sec, m in secs.items()}
        return s, analysis
    raw = store.load_capture(uuid)
    raw.analysis = analysis
    s = summary(raw)
    s.update(board=raw.hello.get("board"), firmware=raw.hello.get("firmware"),
             calibration=raw.hello.get("calibration"), params=raw.params, link=raw.link)
    return s, analysis
