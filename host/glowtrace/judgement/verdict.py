"""A tube's assessment in plain words for its owner: a verdict and what to
do, without statistics ("heater fine, no change since March 2026"; "heater
current falling: replace within a few months"). The statistics stay in the
report's appendix. Built only from what scoring.history() found."""

from datetime import datetime, timezone

from .scoring import NO_BASELINE, _parse_at

# what a change of each figure means to an owner: (when it rises, when it falls)
PLAIN = {
    "cold_resistance_20c_ohm": ("cold resistance rising", "cold resistance falling"),
    "rated_hot_current_a": ("heater current rising", "heater current falling"),
    "rated_inrush_ratio": ("switch-on surge growing", "switch-on surge shrinking"),
    "rated_warmup_90_s": ("warming up more slowly", "warming up faster"),
    "rated_settle_1pct_s": ("taking longer to settle", "settling sooner"),
    "series_warmup_s": ("warming up more slowly in a series string",
                        "warming up faster in a series string"),
    "flash_index": ("flashing more at switch-on", "flashing less at switch-on"),
}
SOON_DAYS = 180  # a limit expected within this: "replace within a few months"


def _month(at: str) -> str:
    return _parse_at(at).astimezone().strftime("%B %Y")


def _changes(result: dict, want) -> list[tuple[str, str, dict]]:
    """(section, words, metric record) of every metric for which want(m)."""
    out = []
    for sec, s in sorted(result["sections"].items()):
        for key, m in s["metrics"].items():
            if key in PLAIN and want(m) and m.get("change") is not None:
                out.append((sec, PLAIN[key][0 if m["change"] > 0 else 1], m))
    return out


def _words(changes) -> str:
    seen = list(dict.fromkeys(w for _, w, _ in changes))
    return ", ".join(seen[:2]) + (" and more" if len(seen) > 2 else "")


def plain(result: dict, none_grade: str = "unfit", now: datetime | None = None) -> dict:
    """{"verdict", "advice", "level"}: level is ok, watch or replace (for the
    page's colour), the words are the owner's. none_grade: the grade given
    to a tube that meets none (scoring settings, grade_none)."""
    now = now or datetime.now(timezone.utc)
    status = result["status"]
    scored = [c for c in result["captures"] if c["scored"]]
    first = _month(scored[0]["at"]) if scored else None
    if status == "heater fault":
        return {"level": "replace", "verdict": "Heater fault: the heater is open, shorted or "
                "failing", "advice": "Replace the tube."}
    if status == "at limit":
        ch = _changes(result, lambda m: m.get("at_limit"))
        return {"level": "replace", "verdict": f"Heater changed past its limit: {_words(ch)}",
                "advice": "Replace the tube soon; it may still work for now, but its heater "
                          "has changed more than a healthy one does."}
    if status == "drifting":
        ch = _changes(result, lambda m: m.get("drifting"))
        soon = [m for _, _, m in ch if m.get("crossing")
                and (_parse_at(m["crossing"]) - now).days <= SOON_DAYS]
        return {"level": "replace" if soon else "watch",
                "verdict": f"Heater changing steadily: {_words(ch)}",
                "advice": "Replace within a few months." if soon else
                          "No need to replace yet; test it again at the next visit."}
    if status == "watch":
        return {"level": "watch", "verdict": "A small change in the heater since " + (first or
                "its first test"), "advice": "Nothing to do now; test it again at the next "
                                            "visit."}
    if status == NO_BASELINE:
        n = len({c["uuid"] for c in scored})  # a capture of both sections is one test
        off_type = result.get("grade") == none_grade
        return {"level": "watch" if off_type else "ok",
                "verdict": ("Heater outside the usual range for its type" if off_type else
                            "Heater fine today") + f" (first test{'s' if n != 1 else ''})",
                "advice": "Later tests will be compared with this one; bring it back at the "
                          "next service to see whether it changes."}
    return {"level": "ok", "verdict": "Heater fine, no change since " + (first or "its first "
            "test"), "advice": "Nothing to do."}
