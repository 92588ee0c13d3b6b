"""The stock list dealers hand on: one row per tube from the fleet's
assessments (JSON), flattened to one line per section for a spreadsheet (CSV);
and an owner's (or a lot's) summary: each tube's status and the day it was
last seen."""

import csv
from pathlib import Path

from .. import outfile


STOCK_FIELDS = ["tube", "type", "owner", "status", "grade", "sections", "hot_current_a",
                "rated_hot_current_a",
                "rated_amps", "current_deviation", "cold_resistance_20c_ohm", "flash_index",
                "section_imbalance", "drifting", "reasons", "scope"]


def stock_rows(assessments: list[dict]) -> list[dict]:
    rows = []
    for a in assessments:
        secs = a["sections"]
        at = a["against_type"]

        def per(metric):
            vals = {s: v["metrics"].get(metric, {}).get("latest") for s, v in secs.items()}
            return {s: v for s, v in vals.items() if v is not None}
        rows.append({
            "tube": a["tube"], "type": a["type"], "owner": a["owner"], "status": a["status"],
            "grade": a["grade"], "sections": "".join(secs),
            "hot_current_a": {s: v["measured"]["hot_current_a"] for s, v in secs.items()
                              if v.get("measured", {}).get("hot_current_a") is not None},
            "rated_hot_current_a": per("rated_hot_current_a"), "rated_amps": at["rated_amps"],
            "current_deviation": at["current_deviation"],
            "cold_resistance_20c_ohm": per("cold_resistance_20c_ohm"),
            "flash_index": per("flash_index"), "section_imbalance": at["section_imbalance"],
            "drifting": a["drifting"], "reasons": a["reasons"], "scope": a["scope"]})
    return rows


def select(rows: list[dict], grade: str | None = None, status: str | None = None,
           sort: str = "tube") -> list[dict]:
    """Rows of that grade and status (any case), in that order; a status
    worst first, a current by the first section's."""
    from ..judgement.scoring import STATUS_ORDER
    out = [r for r in rows
           if (grade is None or (r["grade"] or "").casefold() == grade.casefold())
           and (status is None or r["status"].casefold() == status.casefold())]
    keys = {"tube": lambda r: r["tube"], "type": lambda r: (r["type"] or "", r["tube"]),
            "grade": lambda r: (r["grade"] or "~", r["tube"]),
            "status": lambda r: (STATUS_ORDER.index(r["status"])
                                 if r["status"] in STATUS_ORDER else 99, r["tube"]),
            "current": lambda r: (next(iter(r["rated_hot_current_a"].values()), float("inf")),
                                  r["tube"])}
    return sorted(out, key=keys[sort])


def local_day(at: str) -> str:
    """A stored UTC time as the local calendar day (what a customer calls it)."""
    from ..judgement.scoring import _parse_at
    return _parse_at(at).astimezone().date().isoformat()


def last_seen(store, owner: str | None = None, type_name: str | None = None) -> dict:
    """label -> the local day of the tube's latest capture (None: never)."""
    from ..logbook.records import list_tubes
    return {t["label"]: local_day(t["last_capture"]) if t["last_capture"] else None
            for t in list_tubes(store, owner, type_name)}


def owner_summary(store, name: str, cfg: dict) -> dict:
    """An owner's (or a lot's) tubes: status, grade, the first reason and the
    day each was last seen on the bench."""
    from ..judgement.scoring import assess_fleet
    from ..logbook.records import require_owner
    owner = require_owner(store, name)
    seen = last_seen(store, owner["name"])
    tubes = [{"tube": a["tube"], "type": a["type"], "status": a["status"],
              "grade": a["grade"], "last_seen": seen.get(a["tube"]),
              "reason": (a["reasons"] or [None])[0]}
             for a in assess_fleet(store, cfg, owner=owner["name"])]
    counts: dict = {}
    for t in tubes:
        counts[t["status"]] = counts.get(t["status"], 0) + 1
    return {"owner": owner["name"], "contact": owner["contact"], "tubes": tubes,
            "statuses": counts}


def write_stock_csv(rows: list[dict], path: str | Path) -> None:
    """One line per tube section, flat columns for a spreadsheet."""
    with outfile.replacing(Path(path), "w", newline="") as f:
        w = csv.writer(f)
        w.writerow(["tube", "type", "owner", "section", "status", "grade", "hot_current_a",
                    "rated_hot_current_a",
                    "rated_amps", "current_deviation", "cold_resistance_20c_ohm",
                    "flash_index", "section_imbalance", "drifting", "reasons", "scope"])
        for r in rows:
            for sec in r["sections"] or "-":
                w.writerow([r["tube"], r["type"] or "", r["owner"] or "", sec, r["status"],
                            r["grade"] or "", _g(r["hot_current_a"].get(sec)),
                            _g(r["rated_hot_current_a"].get(sec)),
                            _g(r["rated_amps"]), _g(r["current_deviation"].get(sec)),
                            _g(r["cold_resistance_20c_ohm"].get(sec)),
                            _g(r["flash_index"].get(sec)), _g(r["section_imbalance"]),
                            int(r["drifting"]), " | ".join(r["reasons"]), r["scope"]])


def _g(v) -> str:
    return "" if v is None else f"{v:.6g}"
