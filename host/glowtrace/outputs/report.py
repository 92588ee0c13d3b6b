"""`glowtrace report`: a page a shop hands to its customer, for one tube or
for an owner's visit: the shop and the customer at the top, then per tube a
verdict and what to do in plain words, its figures and curves after, the
statistics in an appendix. Local time throughout; nothing empty (a tube with
one capture gets its curve, no trend panels); print CSS for A4 or Letter.
The plots are PNGs (matplotlib) embedded, so the page is a single file."""

import base64
import html
import io
from datetime import datetime, timezone

import tomllib
from pathlib import Path

import numpy as np

from .. import outfile, paths
from ..errors import GlowtraceError

from ..analysis.curve import stored_curves
from ..judgement.scoring import LABELS, _parse_at, history
from ..judgement.verdict import plain
from .stock import local_day
from ..logbook.store import Store

CAUTION = ("The tube was tested on its own, on a low-voltage bench supply. Equipment that "
           "tubes come out of shares its chassis with lethal plate voltages: before any "
           "work inside it, disconnect it from the mains, discharge the filter capacitors "
           "and check that they are discharged, and follow your local electrical codes; "
           "leave mains work to a licensed person where they require it.")


def _png(fig) -> str:
    import matplotlib.pyplot as plt
    buf = io.BytesIO()
    fig.savefig(buf, format="png", dpi=110)
    plt.close(fig)
    return base64.b64encode(buf.getvalue()).decode()


def _curves_figure(store: Store, caps: list[dict]):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    secs = sorted({c["section"] for c in caps})
    fig, axes = plt.subplots(len(secs), 1, figsize=(8, 3.2 * len(secs)), squeeze=False)
    uuids = list(dict.fromkeys(c["uuid"] for c in caps))
    cmap = plt.get_cmap("viridis")
    for n, uuid in enumerate(uuids):
        at = next(c["at"] for c in caps if c["uuid"] == uuid)
        colour = cmap(n / max(1, len(uuids) - 1))
        for sec, curve in stored_curves(store, uuid).items():
            ax = axes[secs.index(sec)][0]
            on = curve.t > 0
            ax.plot(curve.t[on], curve.i[on], lw=1.0, color=colour, label=at[:10])
    for sec, row in zip(secs, axes):
        ax = row[0]
        ax.set_xscale("log")
        ax.set_title(f"section {sec}: heater current after switch-on")
        ax.set_xlabel("time after switch-on, s")
        ax.set_ylabel("current, A")
        ax.grid(True, which="both", alpha=0.25)
        if len(uuids) <= 12:
            ax.legend(fontsize=7, ncol=2)
    fig.tight_layout()
    return fig


TREND_MIN_POINTS = 3  # a trend panel needs this many scored captures of its figure
SHOP_KEYS = ("name", "address", "contact")


def shop_settings(path=None) -> dict:
    """The shop's name, address and contact from its settings file (TOML,
    a [shop] table): --shop FILE, else $GLOWTRACE_SHOP, else
    ~/.config/glowtrace/shop.toml. None there: {}."""
    p = Path(path) if path else paths.user_config_file("GLOWTRACE_SHOP", "shop.toml")
    if not p.exists():
        if path:
            raise GlowtraceError(f"no shop settings file {p}")
        return {}
    try:
        data = tomllib.loads(p.read_text(encoding="utf-8")).get("shop", {})
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as e:
        raise GlowtraceError(f"{p}: not a settings file ({e})") from None
    if not isinstance(data, dict) or any(not isinstance(data.get(k, ""), str) for k in SHOP_KEYS):
        raise GlowtraceError(f"{p}: [shop] takes name, address and contact as text")
    return {k: data[k] for k in SHOP_KEYS if data.get(k)}


def local_time(at: str) -> str:
    return _parse_at(at).astimezone().strftime("%Y-%m-%d %H:%M")


def _trend_figure(result: dict, caps: list[dict]):
    """Trend panels of the figures with enough scored captures; None when
    no figure has (a tube tested once or twice has no trend to show)."""
    metrics = [m for m in LABELS
               if max((sum(1 for c in caps if c["section"] == sec and c["scored"]
                           and c.get(m) is not None) for sec in result["sections"]),
                      default=0) >= TREND_MIN_POINTS]
    if not metrics:
        return None
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, axes = plt.subplots(len(metrics), 1, figsize=(8, 2.1 * len(metrics)), sharex=True,
                             squeeze=False)
    axes = [a[0] for a in axes]
    for ax, m in zip(axes, metrics):
        for k, sec in enumerate(sorted(result["sections"])):
            pts = [(c["at"], c.get(m), c["scored"]) for c in caps
                   if c["section"] == sec and c.get(m) is not None]
            if not pts:
                continue
            ts = [_parse_at(p[0]).astimezone() for p in pts]
            ys = np.array([p[1] for p in pts], float)
            good = np.array([p[2] for p in pts])
            colour = f"C{k}"
            ax.plot(ts, ys, color=colour, lw=0.8, alpha=0.6)
            ax.scatter([t for t, g in zip(ts, good) if g], ys[good], color=colour, s=14,
                       label=f"section {sec}")
            if (~good).any():
                ax.scatter([t for t, g in zip(ts, good) if not g], ys[~good],
                           facecolors="none", edgecolors=colour, s=18,
                           label=f"{sec}: not scored")
            s = result["sections"][sec]["metrics"].get(m, {})
            if s.get("baseline") is not None:
                b, sc = s["baseline"], s["scale"]
                ax.axhspan(b - 2 * sc, b + 2 * sc, color=colour, alpha=0.12)
                for lim in s.get("limits") or []:
                    ax.axhline(lim, color=colour, ls="--", lw=0.8)
        label, unit = LABELS[m]
        ax.set_title(label, fontsize=9, loc="left")  # long names fit above, not beside
        ax.set_ylabel(unit, fontsize=8)
        ax.grid(True, alpha=0.25)
    axes[0].legend(fontsize=7, ncol=2)
    fig.suptitle("how each figure moved: shaded = its usual range, dashed = its limit",
                 fontsize=10)
    fig.autofmt_xdate()
    fig.tight_layout()
    return fig


CSS = """
body{font-family:sans-serif;max-width:50em;margin:1.5em auto;padding:0 1em;color:#222;
  line-height:1.35}
header{border-bottom:2px solid #444;margin-bottom:1em;padding-bottom:.5em}
header .shop{font-size:1.3em;font-weight:bold}
table{border-collapse:collapse;font-size:.85em;width:100%;table-layout:fixed}
td,th{border:1px solid #ccc;padding:2px 5px;text-align:right;overflow-wrap:anywhere}
th{background:#eee}td.text,th.text{text-align:left}
img{max-width:100%;height:auto}
.tube{margin:1.5em 0;break-inside:avoid-page}
.verdict{font-size:1.2em;font-weight:bold;padding:.3em .5em;border-left:6px solid #888}
.ok{border-color:#2a7}.watch{border-color:#d90}.replace{border-color:#c33}
.advice{margin:.3em 0 .8em .5em}
.note{color:#555;font-size:.85em}
h2{break-after:avoid-page}
@page{size:PAPER;margin:14mm}
@media print{body{max-width:none;margin:0;padding:0}.tube{break-inside:avoid-page}
  .appendix{break-before:page}}
"""
PAPER_CSS = {"A4": "A4", "letter": "letter"}


def _figures_table(caps: list[dict]) -> str:
    e = html.escape

    def f(c, k, d=4):
        v = c.get(k)
        return "-" if v is None else f"{v:.{d}g}"
    rows = "".join(
        f"<tr><td class='text'>{e(local_time(c['at']))}</td><td class='text'>{c['section']}</td>"
        f"<td>{f(c, 'rated_hot_current_a')}</td><td>{f(c, 'rated_warmup_90_s', 3)}</td>"
        f"<td>{f(c, 'cold_resistance_20c_ohm')}</td><td>{f(c, 'flash_index', 2)}</td>"
        f"<td class='text'>{'yes' if c['scored'] else e(c['excluded'] or 'no')}</td></tr>"
        for c in caps)
    return ("<table><tr><th class='text'>tested (local time)</th><th class='text'>section"
            "</th><th>heater current at rated voltage, A</th><th>warm-up to 90 %, s</th>"
            "<th>cold resistance at 20 C, ohm</th><th>flash index</th>"
            "<th class='text'>counted in the trend</th></tr>" + rows + "</table>")


def _tube_block(store: Store, result: dict, caps_shown: list[dict], v: dict) -> str:
    """One tube's part of the page; v: its verdict in plain words."""
    e = html.escape
    caps = result["captures"]
    parts = [f"<section class='tube'><h2>{e(result['tube'])} &middot; "
             f"{e(result['type'] or 'type unknown')}</h2>",
             f"<p class='verdict {v['level']}'>{e(v['verdict'])}</p>",
             f"<p class='advice'>{e(v['advice'])}</p>"]
    if caps_shown:
        parts.append(_figures_table(caps_shown))
        parts.append("<img alt='start-up curves of " + e(result["tube"]) + "' src='data:image/"
                     f"png;base64,{_png(_curves_figure(store, caps))}'>")
    trend = _trend_figure(result, caps) if caps else None
    if trend is not None:
        parts.append(f"<img alt='trends of {e(result['tube'])}' src='data:image/png;base64,"
                     f"{_png(trend)}'>")
    parts.append("</section>")
    return "\n".join(parts)


def _appendix(results: list[dict]) -> str:
    e = html.escape
    parts = ["<section class='appendix'><h2>Appendix: the statistics behind each verdict</h2>"]
    for r in results:
        parts.append(f"<h3>{e(r['tube'])}: status {e(r['status'])}"
                     + (f", grade {e(r['grade'])}" if r["grade"] else "") + "</h3>")
        parts.append("<ul>" + "".join(f"<li>{e(x)}</li>" for x in r["reasons"]) + "</ul>")
    parts.append(f"<p class='note'>Grades and statuses: {e(results[0]['scope'])}. How the "
                 "figures are measured: docs/ANALYSIS.md and docs/SCORING.md in glowtrace. "
                 "Cold resistance is compared at 20 C, so room temperature does not read as "
                 "drift. Times are local.</p></section>" if results else "</section>")
    return "\n".join(parts)


def resolve_target(store: Store, target: str) -> tuple[str, str]:
    """("tube", label) or ("owner", name): a tube's label first, else an
    owner or lot in any case; neither is one clear line."""
    from ..logbook import records
    if records.get_tube(store, target):
        return "tube", target
    owner = records.get_owner(store, target)
    if owner:
        return "owner", owner["name"]
    raise GlowtraceError(f"no tube or owner {target!r} in the logbook (`glowtrace tube list`, "
                         "`glowtrace owner list`)")


def write_report(store: Store, target: str, cfg: dict, path, shop: dict | None = None,
                 visit: str | None = None, paper: str = "A4") -> dict:
    """The page for one tube (all its captures) or an owner's visit (the
    tubes tested that local day; by default their latest)."""
    from ..logbook import records
    kind, name = resolve_target(store, target)
    shop = shop or {}
    none_grade = cfg["grade_none"]["name"]
    if kind == "tube":
        results = [history(store, name, cfg)]
        shown = {name: results[0]["captures"]}
        owner = results[0]["owner"]
        title = f"Heater report: {name}"
        days = sorted({local_day(c["at"]) for c in results[0]["captures"]})
        visit_day = visit or (days[-1] if days else None)
    else:
        owner = name
        tubes = records.list_tubes(store, owner=name)
        all_results = [history(store, t["label"], cfg) for t in tubes]
        days = sorted({local_day(c["at"]) for r in all_results for c in r["captures"]})
        if not days:
            raise GlowtraceError(f"{name} has no tested tubes yet")
        visit_day = visit or days[-1]
        if visit_day not in days:
            raise GlowtraceError(f"{name} had no tubes tested on {visit_day}; their visits: "
                                 + ", ".join(days[-8:]))
        shown = {r["tube"]: [c for c in r["captures"] if local_day(c["at"]) == visit_day]
                 for r in all_results}
        results = [r for r in all_results if shown[r["tube"]]]
        title = f"Heater check for {name}, {visit_day}"
    e = html.escape
    contact = records.get_owner(store, owner)["contact"] if owner else None
    head = ["<header>"]
    if shop:
        head.append(f"<div class='shop'>{e(shop.get('name', ''))}</div>")
        head.append("<div>" + " &middot; ".join(e(shop[k]) for k in ("address", "contact")
                                                  if shop.get(k)) + "</div>")
    head.append(f"<h1>{e(title)}</h1>")
    head.append("<p>" + (f"Customer: {e(owner)}" + (f" ({e(contact)})" if contact else "")
                         + ". " if owner else "")
                + (f"Visit: {e(visit_day)}. " if visit_day else "")
                + f"Written {datetime.now(timezone.utc).astimezone().strftime('%Y-%m-%d %H:%M')}"
                " (local time) with glowtrace.</p></header>")
    verdicts = {r["tube"]: plain(r, none_grade) for r in results}
    summary = ""
    if len(results) > 1:
        summary = ("<table><tr><th class='text'>tube</th><th class='text'>type</th>"
                   "<th class='text'>verdict</th><th class='text'>what to do</th></tr>"
                   + "".join(f"<tr><td class='text'>{e(r['tube'])}</td><td class='text'>"
                             f"{e(r['type'] or '')}</td><td class='text'>"
                             f"{e(verdicts[r['tube']]['verdict'])}</td><td class='text'>"
                             f"{e(verdicts[r['tube']]['advice'])}</td></tr>" for r in results)
                   + "</table>")
    body = [_tube_block(store, r, shown[r["tube"]], verdicts[r["tube"]]) for r in results]
    page = ["<!doctype html><html lang='en'><head><meta charset='utf-8'>",
            "<meta name='viewport' content='width=device-width, initial-scale=1'>",
            f"<title>{e(title)}</title><style>{CSS.replace('PAPER', PAPER_CSS[paper])}</style>"
            "</head><body>", *head, summary,
            "<p class='note'>What was tested: the heater only (its current, warm-up and "
            "switch-on behaviour), not the tube's amplification, noise or emission.</p>",
            *body, _appendix(results), f"<p class='note'>{e(CAUTION)}</p></body></html>"]
    with outfile.replacing(Path(path), "w", encoding="utf-8") as fh:
        fh.write("\n".join(page))
    return {"kind": kind, "name": name, "visit": visit_day, "tubes": [
        {"tube": r["tube"], "status": r["status"], "grade": r["grade"],
         **verdicts[r["tube"]]} for r in results]}
