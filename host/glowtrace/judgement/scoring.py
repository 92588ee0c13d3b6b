"""Judging tubes: each tube section against its own history, each tube
against its type, an assessment in plain words and a grade for dealers.

Reads only the `section_metrics` table (one row per capture and section, the
newest analysis version of each), so a whole fleet is scored without parsing
a single analysis document. Settings: config.py (data/scoring.toml)."""

import json
import math
from dataclasses import dataclass, field
from datetime import datetime, timedelta, timezone

import numpy as np

from .. import catalogue
from ..analysis import ANALYSIS_VERSION
from . import charts
from ..config import METRICS
from ..logbook.store import Store

# the scored figures (config.METRICS): the tube's own, at its rated voltage
LABELS = {
    "cold_resistance_20c_ohm": ("cold resistance at 20 C", "ohm"),
    "rated_hot_current_a": ("hot current at rated voltage", "A"),
    "rated_inrush_ratio": ("inrush at rated voltage, 20 C (over hot current)", "x"),
    "rated_warmup_90_s": ("warm-up to 90 % at rated voltage", "s"),
    "rated_settle_1pct_s": ("hot-current settling (1 %) at rated voltage", "s"),
    "series_warmup_s": ("series-string warm-up (to 80 %)", "s"),
    "flash_index": ("flash index", ""),
}
# measured figures of the latest scored capture, shown beside the rated ones
MEASURED = ("hot_current_a", "inrush_ratio", "warmup_90_s", "settle_1pct_s")
# a tube without enough good cold starts for a baseline: not "new", which in
# this trade reads as new stock
NO_BASELINE = "no baseline yet"
# what a heater capture can and cannot say, shown with every grade
HEATER_SCOPE = ("heater test only: emission, transconductance, shorts between elements, "
                "gas and noise are not tested")
# statuses, worst first: words of our own
STATUS_ORDER = ("heater fault", "at limit", "drifting", "watch", "no baseline yet", "steady")
SECONDS_PER_YEAR = 365.25 * 86400


def _parse_at(at: str) -> datetime:
    d = datetime.fromisoformat(at.replace("Z", "+00:00"))
    return d if d.tzinfo else d.replace(tzinfo=timezone.utc)


def _years(ats: list[str]) -> np.ndarray:
    t0 = _parse_at(ats[0])
    return np.array([(_parse_at(a) - t0).total_seconds() / SECONDS_PER_YEAR for a in ats])


@dataclass
class MetricScore:
    metric: str
    n: int
    baseline: float | None = None
    scale: float | None = None
    latest: float | None = None
    change: float | None = None          # relative to baseline (flash: absolute)
    z_latest: float | None = None
    ewma_signal: bool = False
    cusum_signal: bool = False
    trend_per_year: float | None = None  # relative (flash: absolute) change per year
    trend_p: float | None = None
    trend_significant: bool = False
    limit: float | None = None          # the limit in the bad direction
    limits: list = field(default_factory=list)  # every limit line (both: low, high)
    at_limit: bool = False
    crossing: str | None = None          # ISO date the trend reaches the limit
    drifting: bool = False
    reasons: list = field(default_factory=list)


def _bad(direction: str, sign: float) -> bool:
    return (direction == "up" and sign > 0) or (direction == "down" and sign < 0) or (
        direction == "both" and sign != 0)


def score_metric(metric: str, ats: list[str], xs: list[float], n_base: int,
                 base_index: list[int] | None, cfg: dict, section: str,
                 years: list[float] | None = None, pooled: float | None = None) -> MetricScore:
    """One metric of one tube section; xs are the scored captures' values in
    time order, ats their times (years: the same in years from the first);
    base_index the user's baseline captures (positions in xs); pooled the
    noise of this metric pooled over the type's tubes (relative, or absolute
    for the flash index), None when the logbook holds too few.

    Relative metrics are judged on ln x, so their noise is a share. The noise
    sigma is never taken from the baseline's own spread (three points say
    little about it): it is the larger of the noise floor and the pooled
    noise. Each capture after the baseline is a Q statistic against the mean
    of all before it (charts.q_statistics); the CUSUM runs on those."""
    ch = cfg["charts"]
    lim = cfg["limits"][metric]
    direction = lim["direction"]
    absolute = metric == "flash_index"
    x = [float(v) for v in xs]
    s = MetricScore(metric, len(x))
    if not x or (not absolute and min(x) <= 0):
        return s
    s.latest = x[-1]
    idx = base_index if base_index else list(range(min(n_base, len(x))))
    if len(idx) < n_base and not base_index:
        return s
    y = x if absolute else [math.log(v) for v in x]
    base = [y[k] for k in idx]
    centre_y = sum(base) / len(base)
    sigma = max(cfg["noise_floor"][metric], pooled or 0.0)
    centre = centre_y if absolute else math.exp(centre_y)
    s.baseline, s.scale = centre, sigma * (1.0 if absolute else centre)
    s.z_latest = (y[-1] - centre_y) / (sigma * math.sqrt(1.0 + 1.0 / len(base)))
    s.change = (x[-1] - centre) if absolute else (x[-1] / centre - 1.0)
    q = charts.q_statistics(base, y[max(idx) + 1:], sigma)
    if q:
        e = charts.ewma(q, 0.0, 1.0, ch["ewma_lambda"], ch["ewma_limit"])
        last = float(e.values[-1])
        s.ewma_signal = (last > e.upper and _bad(direction, 1)) or (
            last < e.lower and _bad(direction, -1))
        c = charts.cusum(q, 0.0, ch["cusum_k"], ch["cusum_h"])
        s.cusum_signal = (c.upper[-1] > c.h and _bad(direction, 1)) or (
            c.lower[-1] > c.h and _bad(direction, -1))
    t = years if years is not None else list(_years(ats))
    first = min(idx)
    ty, yy = t[first:], y[first:]
    slope = icpt = None
    if len(yy) >= ch["trend_min"] and ty[-1] > ty[0]:
        slope, icpt = charts.theil_sen(ty, yy)
        mk = charts.mann_kendall(yy, ty)
        s.trend_per_year = slope  # ln units: a share a year (flash: absolute)
        s.trend_p = mk.p
        moved = abs(slope * (ty[-1] - ty[0])) > 2 * sigma
        s.trend_significant = mk.p < ch["trend_p"] and _bad(direction, slope) and moved
    set_limits(s, lim, centre, absolute)
    s.drifting = s.ewma_signal or s.cusum_signal or s.trend_significant
    if s.at_limit or s.drifting:
        explain(s, direction, slope, icpt, ty[-1] if len(ty) else None, ats[-1], section)
    return s


def set_limits(s: MetricScore, lim: dict, centre: float, absolute: bool) -> None:
    """The limit lines about the baseline, and whether the latest is at one."""
    direction = lim["direction"]
    if absolute:  # the flash index: an amount above its baseline
        s.limits = [centre + lim["absolute"]]
        s.at_limit = s.latest >= s.limits[0]
    else:
        ch_ = lim["change"]
        s.limits = {"up": [centre * (1 + ch_)], "down": [centre * (1 - ch_)],
                    "both": [centre * (1 - ch_), centre * (1 + ch_)]}[direction]
        s.at_limit = abs(s.change) >= ch_ and _bad(direction, s.change)
    s.limit = s.limits[-1] if direction != "down" else s.limits[0]


def explain(s: MetricScore, direction: str, slope, icpt, t_last, at_last: str,
            section: str) -> None:
    """The crossing date of a trend and the reasons, for a metric at its
    limit or drifting (the others say nothing)."""
    absolute = s.metric == "flash_index"
    label, unit = LABELS[s.metric]
    where = f"section {section}: {label}"

    def fmt(v):
        return f"{v:+.3f}" if absolute else f"{100 * v:+.1f} %"
    if s.trend_significant and not s.at_limit and slope:
        target = s.limit if absolute else math.log(s.limit)
        if direction == "both":
            target = math.log(s.limits[1] if slope > 0 else s.limits[0])
        years_left = (target - (icpt + slope * t_last)) / slope
        if 0 < years_left < 50:
            when = _parse_at(at_last) + timedelta(days=365.25 * years_left)
            s.crossing = when.date().isoformat()
    if s.at_limit:
        shown = " / ".join(f"{v:.4g}" for v in s.limits)
        s.reasons.append(f"{where} is {fmt(s.change)} from its baseline, at or past its "
                         f"limit ({f'{shown} {unit}'.strip()})")
    elif s.drifting:
        why = []
        if s.trend_significant:
            p = "p < 0.001" if s.trend_p < 0.001 else f"p = {s.trend_p:.3f}"
            why.append(f"a steady trend of {fmt(s.trend_per_year)} a year (Mann-Kendall {p})")
        if s.cusum_signal or s.ewma_signal:
            why.append("a lasting shift beyond the noise (CUSUM/EWMA of Q statistics)")
        msg = f"{where} has moved {fmt(s.change)} from its baseline: " + " and ".join(why)
        if s.crossing:
            msg += f"; at this rate it reaches its limit around {s.crossing}"
        s.reasons.append(msg)


def _excluded_fault(row: dict) -> bool:
    ex = row["excluded"] or ""
    if ex.startswith("not judged"):
        return False
    return ex.startswith("heater fault") or "open heater" in ex or "shorted" in ex


def score_section(rows: list[dict], cfg: dict, section: str,
                  baseline_uuids: list[str] | None = None, noise: dict | None = None,
                  scores: dict | None = None) -> dict:
    """noise: the type's pooled noise per metric (type_noise), or None;
    scores: the section's MetricScores computed already (fleet_scores)."""
    scored = [r for r in rows if r["scored"]]
    n_base = int(cfg["baseline"]["count"])
    out = {"captures": len(rows), "scored": len(scored), "metrics": {}, "reasons": [],
           "measured": {c: scored[-1][c] for c in MEASURED} if scored else {}}
    stale = sorted({r["version"] for r in rows if r["version"] != ANALYSIS_VERSION})
    if stale:
        out["reasons"].append(
            f"section {section}: captures analysed by analysis {', '.join(stale)} lack the "
            f"figures at rated voltage this judgement uses: run `glowtrace reanalyze`")
    if rows and _excluded_fault(rows[-1]):
        out["status"] = "heater fault"
        out["reasons"].append(f"section {section}: the latest capture shows "
                              f"{rows[-1]['excluded']}")
        return out
    statuses = []
    if scores is None:
        scores = {}
        yrs = list(_years([r["at"] for r in scored])) if scored else []
        for m in METRICS:
            pts = [(r["at"], r[m], r["capture_uuid"], y) for r, y in zip(scored, yrs)
                   if r[m] is not None]
            ats, xs, uuids = [p[0] for p in pts], [p[1] for p in pts], [p[2] for p in pts]
            years = [p[3] for p in pts]
            base_idx = [uuids.index(u) for u in (baseline_uuids or []) if u in uuids] or None
            scores[m] = score_metric(m, ats, xs, n_base, base_idx, cfg, section, years,
                                     (noise or {}).get(m))
    for m in METRICS:
        s = scores[m]
        shown = dict(s.__dict__)
        del shown["reasons"]
        out["metrics"][m] = shown
        if s.reasons:  # metrics at their limit lead the reasons
            out["reasons"] = (s.reasons + out["reasons"]) if s.at_limit \
                else (out["reasons"] + s.reasons)
        if s.at_limit and s.baseline is not None:
            statuses.append("at limit")
        elif s.drifting:
            statuses.append("drifting")
        elif s.z_latest is not None and abs(s.z_latest) > 4:
            statuses.append("watch")
            out["reasons"].append(f"section {section}: the latest {LABELS[m][0]} is "
                                  f"{s.z_latest:+.1f} noise units from its baseline "
                                  "(a single capture: measure again)")
    if len(scored) < n_base and not baseline_uuids:
        statuses.append(NO_BASELINE)
        out["reasons"].append(f"section {section}: {len(scored)} good cold start(s) of the "
                              f"{n_base} that make its baseline")
    out["status"] = min(statuses or ["steady"], key=STATUS_ORDER.index)
    out["drifting"] = any(v["drifting"] for v in out["metrics"].values())
    return out


def worst(statuses) -> str:
    return min(statuses or ["steady"], key=STATUS_ORDER.index)


# loading ------------------------------------------------------------------
_ROWS_SQL = """
SELECT {columns} FROM section_metrics s WHERE s.current = 1
{where} ORDER BY s.tube, s.section, s.at, s.capture_uuid"""
# what judging reads of a row (a fleet fetches only these)
JUDGED = ("capture_uuid", "section", "version", "tube", "at", "scored", "excluded",
          "hot_resistance_ohm") + tuple(dict.fromkeys(METRICS + MEASURED))


def load_rows(store: Store, tube: str | None = None, columns: tuple | None = None) -> dict:
    """tube -> section -> rows in time order (newest analysis of each);
    columns: only these (default: every column)."""
    sql = _ROWS_SQL.format(where="AND s.tube = ?" if tube else "",
                           columns=", ".join(f"s.{c}" for c in columns) if columns else "s.*")
    cur = store.db.execute(sql, [tube] if tube else [])
    cols = [d[0] for d in cur.description]
    out: dict = {}
    for r in cur.fetchall():
        row = dict(zip(cols, r))
        out.setdefault(row["tube"], {}).setdefault(row["section"], []).append(row)
    return out


# the figures a tube is placed among its type by (against_type)
PLACED_BY = ("rated_hot_current_a", "cold_resistance_20c_ohm")


@dataclass
class TypeFigures:
    """What a tube is judged against from its type: the noise pooled over
    its tubes, raw per metric (sigma, degrees of freedom), and the newest
    scored values of each of its tube sections (sorted) for PLACED_BY."""
    noise_raw: dict
    population: dict

    def noise(self, cfg: dict) -> dict:
        least = cfg["charts"]["pool_min_df"]
        return {m: (s if df >= least else None) for m, (s, df) in self.noise_raw.items()}

    def pack(self) -> tuple[str, bytes]:
        counts = [len(self.population[m]) for m in PLACED_BY]
        values = np.concatenate([self.population[m] for m in PLACED_BY])
        return json.dumps({"noise": self.noise_raw, "counts": counts}), values.tobytes()

    @classmethod
    def unpack(cls, noise: str, population: bytes) -> "TypeFigures":
        d = json.loads(noise)
        values = np.frombuffer(population, dtype=float)
        bounds = np.cumsum([0] + d["counts"])
        return cls({m: tuple(v) for m, v in d["noise"].items()},
                   {m: values[bounds[k]:bounds[k + 1]] for k, m in enumerate(PLACED_BY)})


def type_figures(store: Store, type_name: str) -> TypeFigures:
    """A type's figures, computed once and kept in the logbook until it
    changes (logbook_generation): one query over the type's scored rows."""
    kept = store.scoring_cache(type_name, ANALYSIS_VERSION)
    if kept is not None:
        return TypeFigures.unpack(*kept)
    cols = ", ".join(METRICS)
    with store.snapshot():
        generation = store.generation()
        cur = store.db.execute(
            f"SELECT s.tube, s.section, {cols} FROM section_metrics s WHERE s.current = 1 "
            "AND s.scored = 1 AND s.version = ? AND s.tube IN "
            "(SELECT label FROM tubes WHERE type = ?) ORDER BY s.tube, s.section, s.at",
            [ANALYSIS_VERSION, type_name])
        series: dict = {}
        for r in cur.fetchall():
            series.setdefault((r[0], r[1]), []).append(r[2:])
    figures = _figures(list(series.values()))
    store.keep_scoring_cache(type_name, ANALYSIS_VERSION, generation, *figures.pack())
    return figures


def _figures(section_series: list[list[tuple]]) -> TypeFigures:
    """section_series: per tube section, its scored rows' METRICS in time order."""
    noise, population = {}, {}
    for k, m in enumerate(METRICS):
        series = []
        for rows in section_series:
            vals = [r[k] for r in rows if r[k] is not None]
            if m != "flash_index":
                vals = [math.log(v) for v in vals if v > 0]
            series.append(vals)
        sigma, df = charts.pooled_sigma(series)
        noise[m] = (sigma, df)
        if m in PLACED_BY:
            newest = [rows[-1][k] for rows in section_series if rows and rows[-1][k] is not None]
            population[m] = np.sort(np.array(newest, dtype=float))
    return TypeFigures(noise, population)


def type_noise(section_series: list[list[dict]], cfg: dict) -> dict:
    """Per metric, the noise pooled over the scored captures of every tube
    section of a type (charts.pooled_sigma on ln x; flash index absolute), or
    None below the configured degrees of freedom. section_series: rows as
    dicts, in time order per tube section (the scored ones count)."""
    rows = [[tuple(r[m] for m in METRICS) for r in rs if r["scored"]] for rs in section_series]
    return _figures(rows).noise(cfg)


def load_baselines(store: Store, tube: str | None = None) -> dict:
    sql = "SELECT tube, section, captures FROM baselines" + (" WHERE tube = ?" if tube else "")
    return {(t, s): json.loads(c) for t, s, c in
            store.db.execute(sql, [tube] if tube else []).fetchall()}


def percentile(value: float, population) -> float:
    """Share of the population at or below value, 0-100 (mid-rank for ties).
    population: sorted ascending (TypeFigures keeps it so)."""
    p = np.asarray(population, float)
    below = int(np.searchsorted(p, value, "left"))
    at_or_below = int(np.searchsorted(p, value, "right"))
    return float(100.0 * (below + 0.5 * (at_or_below - below)) / len(p))


# tubes --------------------------------------------------------------------
def assess(tube: dict, sections: dict, cfg: dict, baselines: dict,
           population: dict | None, noise: dict | None = None,
           scores: dict | None = None, kinds=None) -> dict:
    """Assessment of one tube from its section rows; scores: its sections'
    MetricScores computed already, by section (fleet_scores); kinds: the
    catalogue, when the caller has it loaded (a fleet reads it once)."""
    tube_type = None
    if tube.get("type"):
        try:
            tube_type = (kinds or catalogue.load()).get(tube["type"])
        except catalogue.UnknownType:  # a broken catalogue file is an error, said
            tube_type = None
    # the sections measured so far; a tube never captured shows its type's
    wanted = tuple(sorted(sections)) or (
        ("A", "B") if tube_type is None or tube_type.centre_tapped else ("A",))
    result = {"tube": tube["label"], "type": tube.get("type"), "owner": tube.get("owner"),
              "sections": {}, "reasons": []}
    for sec in wanted:
        rows = sections.get(sec, [])
        if not rows and tube_type is None:
            continue
        sc = score_section(rows, cfg, sec, baselines.get((tube["label"], sec)), noise,
                           (scores or {}).get(sec))
        result["sections"][sec] = sc
    # the worst section's reasons first
    for sc in sorted(result["sections"].values(), key=lambda x: STATUS_ORDER.index(x["status"])):
        result["reasons"] += sc["reasons"]
    statuses = [s["status"] for s in result["sections"].values()]
    if not any(s["scored"] for s in result["sections"].values()):
        statuses.append(NO_BASELINE)
    result["status"] = worst(statuses)
    result["drifting"] = any(s.get("drifting") for s in result["sections"].values())
    result["against_type"] = against_type(result, sections, tube_type, cfg, population)
    result["reasons"] += result["against_type"].pop("reasons")
    result["grade"] = grade(result, cfg)
    result["scope"] = HEATER_SCOPE
    if not result["reasons"]:
        result["reasons"].append("no change beyond the measurement noise")
    return result


def _latest_scored(rows: list[dict]) -> dict | None:
    good = [r for r in rows if r["scored"]]
    return good[-1] if good else None


def against_type(result: dict, sections: dict, tube_type, cfg: dict,
                 population: dict | None) -> dict:
    out = {"rated_amps": None, "current_deviation": {}, "within_tolerance": None,
           "percentile": {}, "section_imbalance": None, "reasons": []}
    tol = cfg["type"]["hot_current_tolerance"]
    if tube_type is not None and tube_type.hot_current_tolerance is not None:
        tol = float(tube_type.hot_current_tolerance)
    out["tolerance"] = tol
    latest = {sec: _latest_scored(rows) for sec, rows in sections.items()}
    if tube_type is not None:
        rated = tube_type.section_rating().amps
        out["rated_amps"] = rated
        for sec, row in latest.items():
            # the tube's own hot current at its rated voltage, whatever the
            # bench's supply was set to
            if row and row["rated_hot_current_a"]:
                dev = row["rated_hot_current_a"] / rated - 1
                out["current_deviation"][sec] = dev
                if abs(dev) > tol:
                    out["reasons"].append(
                        f"section {sec}: hot current at rated voltage "
                        f"{row['rated_hot_current_a']:.3f} A is {100 * dev:+.1f} % from the "
                        f"rated {rated:g} A (tolerance {100 * tol:g} %)")
        if out["current_deviation"]:
            out["within_tolerance"] = all(abs(d) <= tol for d in out["current_deviation"].values())
    if population:
        n = len(population.get("rated_hot_current_a", []))
        if n >= cfg["type"]["min_population"]:
            for sec, row in latest.items():
                if row:
                    out["percentile"][sec] = {
                        m: percentile(row[m], population[m]) for m in PLACED_BY
                        if row[m] is not None}
            out["population"] = n
    # series-string warm-up against the type's rated (controlled) warm-up time
    out["series_warmup_deviation"] = {}
    rated_w = tube_type.controlled_warmup_s if tube_type is not None else None
    if rated_w:
        w_tol = cfg["type"]["series_warmup_tolerance"]
        for sec, row in latest.items():
            if row and row["series_warmup_s"]:
                dev = row["series_warmup_s"] / rated_w - 1
                out["series_warmup_deviation"][sec] = dev
                if abs(dev) > w_tol:
                    out["reasons"].append(
                        f"section {sec}: series-string warm-up {row['series_warmup_s']:.1f} s "
                        f"is {100 * dev:+.0f} % from the type's rated {rated_w:g} s (tolerance "
                        f"{100 * w_tol:g} %): in a series string it "
                        + ("lags, and the others see more than their rated voltage"
                           if dev > 0 else "runs ahead and sees more than its rated voltage"))
    a, b = latest.get("A"), latest.get("B")
    if a and b and a["hot_resistance_ohm"] and b["hot_resistance_ohm"]:
        ra, rb = a["hot_resistance_ohm"], b["hot_resistance_ohm"]
        out["section_imbalance"] = abs(ra - rb) / (0.5 * (ra + rb))
    return out


def grade(result: dict, cfg: dict) -> str | None:
    """The first grade whose every limit the tube meets; None when it cannot
    be judged (unknown type, no good capture)."""
    at = result["against_type"]
    if result["status"] == "heater fault":  # judged, and unfit, whatever else
        return cfg["grade_none"]["name"]
    if not at["current_deviation"]:
        return None
    dev = max(abs(d) for d in at["current_deviation"].values())
    flashes = [s["metrics"].get("flash_index", {}).get("latest")
               for s in result["sections"].values()]
    flash = max((f for f in flashes if f is not None), default=0.0)
    imb = at["section_imbalance"]
    bad = result["status"] in ("heater fault", "at limit")
    for g in cfg["grades"]:
        if bad:
            break
        if "max_current_deviation" in g and dev > g["max_current_deviation"]:
            continue
        if "max_flash_index" in g and flash > g["max_flash_index"]:
            continue
        if "max_section_imbalance" in g and imb is not None and imb > g["max_section_imbalance"]:
            continue
        if "max_series_warmup_deviation" in g and at["series_warmup_deviation"] and max(
                abs(d) for d in at["series_warmup_deviation"].values()) \
                > g["max_series_warmup_deviation"]:
            continue
        if not g.get("allow_drifting", True) and result["drifting"]:
            continue
        return g["name"]
    return cfg["grade_none"]["name"]


def assess_tube(store: Store, label: str, cfg: dict, rows: dict | None = None) -> dict:
    """rows: the tube's section rows, if the caller has loaded them already."""
    from ..logbook.records import require_tube
    tube = require_tube(store, label)
    if rows is None:
        rows = load_rows(store, label).get(label, {})
    figures = type_figures(store, tube["type"]) if tube["type"] else None
    return assess(tube, rows, cfg, load_baselines(store, label),
                  figures.population if figures else None,
                  figures.noise(cfg) if figures else None)


def history(store: Store, label: str, cfg: dict) -> dict:
    """The assessment plus every capture of the tube with its analysis."""
    section_rows = load_rows(store, label).get(label, {})
    result = assess_tube(store, label, cfg, section_rows)
    rows = store.db.execute(
        "SELECT c.uuid, c.started_at, c.section, c.source, c.complete, c.incomplete_reason, "
        "(SELECT result FROM analyses a WHERE a.capture_uuid = c.uuid "
        " ORDER BY a.version COLLATE analysis_version DESC LIMIT 1) FROM captures c "
        "WHERE c.tube = ? "
        "ORDER BY c.started_at, c.uuid", [label]).fetchall()
    excluded = {(r["capture_uuid"], sec): r for sec, rs in
                section_rows.items() for r in rs}
    caps = []
    for uuid, at, section, source, complete, why, res in rows:
        analysis = json.loads(res) if res else {}
        for sec in section:
            m = dict(analysis.get("sections", {}).get(sec, {}))
            m.pop("thermal_model", None)
            row = excluded.get((uuid, sec), {})
            left_out = row.get("excluded")
            if not row:  # no figures to score: say why (not analysed, or not yet)
                left_out = (analysis.get("warnings") or ["not analysed yet: run "
                                                         "`glowtrace reanalyze`"])[0]
            caps.append({"uuid": uuid, "at": at, "section": sec, "source": source,
                         "complete": bool(complete), "incomplete_reason": why,
                         "scored": bool(row.get("scored")), "excluded": left_out,
                         **m, "inrush_20c": row.get("inrush_20c")})
    result["captures"] = caps
    return result


def assess_fleet(store: Store, cfg: dict, type_name: str | None = None,
                 owner: str | None = None) -> list[dict]:
    from ..logbook.records import list_tubes
    tubes = list_tubes(store, owner=owner, type_name=type_name)
    rows = load_rows(store, columns=JUDGED)
    baselines = load_baselines(store)
    figures = {t: type_figures(store, t) for t in {t["type"] for t in tubes if t["type"]}}
    noises = {t: f.noise(cfg) for t, f in figures.items()}
    scores = fleet_scores([(t, rows.get(t["label"], {})) for t in tubes], cfg, baselines,
                          noises)
    kinds = catalogue.load()
    return [assess(t, rows.get(t["label"], {}), cfg, baselines,
                   figures[t["type"]].population if t["type"] else None,
                   noises.get(t["type"]), scores.get(t["label"]), kinds)
            for t in tubes]


def fleet_scores(tubes: list, cfg: dict, baselines: dict, noises: dict) -> dict:
    """label -> section -> metric -> MetricScore for the tube sections scored
    on their default baseline, computed for all of them together (fleet.py);
    a section with a baseline of the user's is left to score_section.

    Every scored row of the fleet goes into one array (rows of a tube
    section together, in time order); per metric, the sections whose series
    have the same length are gathered into one [sections x n] array."""
    from operator import itemgetter
    from . import fleet
    n_base = int(cfg["baseline"]["count"])
    out: dict = {}
    keys, gids, flat = [], [], []  # per section: (its scores, section, sigma by metric)
    sigmas_of = {t: [max(cfg["noise_floor"][m], (noise or {}).get(m) or 0.0) for m in METRICS]
                 for t, noise in noises.items()}
    floors = [cfg["noise_floor"][m] for m in METRICS]
    for tube, sections in tubes:
        sigma = sigmas_of.get(tube["type"], floors)
        for sec, rows in sections.items():
            if (tube["label"], sec) in baselines or (rows and _excluded_fault(rows[-1])):
                continue  # the user's baseline, or a heater fault: score_section
            scored = [r for r in rows if r["scored"]]
            gids += [len(keys)] * len(scored)
            flat += scored
            keys.append((out.setdefault(tube["label"], {}).setdefault(sec, {}), sec, sigma))
    if not keys:
        return out
    gid = np.array(gids, dtype=np.int64)
    values = np.array(list(map(itemgetter(*METRICS), flat)), dtype=float).reshape(
        len(flat), len(METRICS))
    ats = [r["at"] for r in flat]
    years = fleet.fleet_years(ats, gid)
    sigmas = np.array([k[2] for k in keys])
    for j, m in enumerate(METRICS):
        lim = cfg["limits"][m]
        absolute = m == "flash_index"
        x_all = values[:, j]
        idx = np.nonzero(~np.isnan(x_all))[0]
        g_of = gid[idx]
        counts = np.bincount(g_of, minlength=len(keys))
        bad = np.zeros(len(keys), bool) if absolute else np.bincount(
            g_of, weights=x_all[idx] <= 0, minlength=len(keys)) > 0
        short = (counts < n_base) | bad
        last_row = np.full(len(keys), -1)
        last_row[g_of] = idx  # the last valid row of each section (rows in order)
        for g in np.nonzero(short)[0].tolist():
            s = MetricScore(m, int(counts[g]))
            if counts[g] and not bad[g]:
                s.latest = float(x_all[last_row[g]])
            keys[g][0][m] = s
        for n in np.unique(counts[~short]).tolist():
            members = np.nonzero((counts == n) & ~short)[0]
            rows_of = idx[np.isin(g_of, members)].reshape(len(members), n)
            x = x_all[rows_of]
            t = years[rows_of]
            sigma = sigmas[members, j]
            y = x if absolute else np.log(x)
            st = fleet.series_statistics(y, t, sigma, n_base, cfg["charts"], lim["direction"])
            centre = st["centre_y"] if absolute else np.exp(st["centre_y"])
            latest = x[:, -1]
            change = latest - centre if absolute else latest / centre - 1.0
            scale = sigma * (1.0 if absolute else centre)
            cols = [a.tolist() for a in (centre, scale, latest, change, st["z_latest"],
                                         st["ewma_signal"], st["cusum_signal"],
                                         st["has_trend"], st["slope"], st["icpt"],
                                         st["trend_p"], st["trend_significant"], t[:, -1],
                                         rows_of[:, -1], members)]
            for (c, sc, la, chg, z, ew, cu, has, slope, icpt, p, sig, t_last, last,
                 g) in zip(*cols):
                s = MetricScore(m, n, baseline=c, scale=sc, latest=la, change=chg,
                                z_latest=z, ewma_signal=ew, cusum_signal=cu)
                if has:
                    s.trend_per_year, s.trend_p, s.trend_significant = slope, p, sig
                else:
                    slope = icpt = None
                set_limits(s, lim, c, absolute)
                s.drifting = s.ewma_signal or s.cusum_signal or s.trend_significant
                mine, sec, _ = keys[g]
                if s.at_limit or s.drifting:
                    explain(s, lim["direction"], slope, icpt, t_last, ats[last], sec)
                mine[m] = s
    return out
