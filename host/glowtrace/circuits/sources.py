"""Where a heater's model comes from: a stored capture (UUID or a unique
prefix), a tube's latest good cold start, or a CSV curve measured on the
spot. Each gives the fitted thermal model and the rating it is judged at."""

import json
from pathlib import Path

from .. import catalogue
from ..analysis.thermal import ThermalModel
from ..errors import GlowtraceError
from ..logbook.store import Store
from .simulate import Heater


class SourceError(GlowtraceError):
    pass


NO_MODEL = ("has no fitted thermal model (a warm start, an open heater, a filament "
            "without a sleeve, or a curve too short): capture a cold start")


def _rating(type_name: str | None) -> tuple[float | None, float | None]:
    if not type_name:
        return None, None
    try:
        r = catalogue.load().get(type_name).section_rating()
    except catalogue.UnknownType:
        return None, None
    return r.volts, r.amps


def _pick_section(analysis: dict, section: str | None, what: str) -> tuple[str, dict]:
    secs = analysis.get("sections", {})
    if section:
        if section not in secs:
            raise SourceError(f"{what} has no section {section} (it has "
                              f"{', '.join(secs) or 'none'})")
        return section, secs[section]
    if not secs:
        raise SourceError(f"{what} {NO_MODEL}")
    sec = "A" if "A" in secs else sorted(secs)[0]
    return sec, secs[sec]


def from_capture(store: Store, prefix: str, section: str | None) -> Heater:
    uuid = store.find_uuid(prefix)
    row = store.db.execute("SELECT c.tube, t.type FROM captures c LEFT JOIN tubes t "
                           "ON t.label = c.tube WHERE c.uuid = ?", [uuid]).fetchone()
    analysis = store.analysis(uuid) or {}
    sec, m = _pick_section(analysis, section, f"capture {uuid[:8]}")
    if not m.get("thermal_model"):
        raise SourceError(f"capture {uuid[:8]} section {sec} {NO_MODEL}")
    v, a = _rating(row[1])
    return Heater(f"{row[0]} {sec} ({uuid[:8]})", ThermalModel.from_dict(m["thermal_model"]),
                  v, a)


def from_tube(store: Store, label: str, section: str | None) -> Heater:
    """The tube's newest cold start whose section has a fitted model."""
    t = store.tube(label)
    rows = store.db.execute("SELECT uuid FROM captures WHERE tube = ? AND complete = 1 "
                            "ORDER BY started_at DESC, uuid DESC", [label]).fetchall()
    for (uuid,) in rows:
        analysis = store.analysis(uuid) or {}
        secs = analysis.get("sections", {})
        for sec in ([section] if section else ["A", "B"]):
            m = secs.get(sec) or {}
            if m.get("thermal_model") and m.get("cold_start_ok"):
                v, a = _rating(t["type"])
                return Heater(f"{label} {sec}", ThermalModel.from_dict(m["thermal_model"]),
                              v, a)
    raise SourceError(f"tube {label!r} has no cold start with a fitted thermal model"
                      + (f" in section {section}" if section else "")
                      + ": capture one, or give a capture or a CSV curve")


def from_csv(path: Path, ambient_c: float | None, type_name: str | None,
             rated_v: float | None, rated_a: float | None) -> Heater:
    from ..analysis.analyze import analyze_file
    _, result = analyze_file(path, ambient_c, type_name, rated_v, rated_a)
    if not result.get("thermal_model"):
        raise SourceError(f"{path} {NO_MODEL}")
    if type_name:
        rated_v, rated_a = _rating(type_name)
    return Heater(path.name, ThermalModel.from_dict(result["thermal_model"]), rated_v, rated_a)


def resolve(db_path, sources: list[str], section: str | None = None,
            ambient_c: float | None = None, type_name: str | None = None,
            rated_v: float | None = None, rated_a: float | None = None) -> list[Heater]:
    """Every SOURCE as a Heater: a CSV file if there is such a file, else a
    tube label in the logbook, else a capture UUID prefix."""
    heaters, store = [], None
    try:
        for s in sources:
            p = Path(s)
            if p.is_file():
                heaters.append(from_csv(p, ambient_c, type_name, rated_v, rated_a))
                continue
            if store is None:
                store = Store(db_path, create=False)
            if store.tube(s):
                heaters.append(from_tube(store, s, section))
            else:
                try:
                    heaters.append(from_capture(store, s, section))
                except SourceError:
                    raise
                except GlowtraceError:
                    raise SourceError(f"{s!r} is no CSV file, tube label or capture in "
                                      f"{store.path}") from None
    finally:
        if store is not None:
            store.close()
    return heaters


def describe(h: Heater) -> dict:
    return {"heater": h.name, "rated_volts": h.rated_v, "rated_amps": h.rated_a,
            "model": json.loads(json.dumps(h.model.as_dict()))}
