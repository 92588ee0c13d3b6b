"""`glowtrace report`: one HTML page per tube that a shop can hand to its
owner: the assessment in plain words, the captures, the start-up curves
overlaid by date and each metric's trend with its baseline band. The plots
are PNGs (matplotlib) embedded in the page, so it is a single file."""

import base64
import html
import io
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from .. import outfile

from ..analysis.curve import stored_curves
from ..judgement.scoring import LABELS, _parse_at, history
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


def _trend_figure(result: dict, caps: list[dict]):
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    metrics = list(LABELS)
    fig, axes = plt.subplots(len(metrics), 1, figsize=(8, 2.1 * len(metrics)), sharex=True)
    for ax, m in zip(axes, metrics):
        for k, sec in enumerate(sorted(result["sections"])):
            pts = [(c["at"], c.get(m), c["scored"]) for c in caps
                   if c["section"] == sec and c.get(m) is not None]
            if not pts:
                continue
            ts = [_parse_at(p[0]) for p in pts]
            ys = np.array([p[1] for p in pts], float)
            good = np.array([p[2] for p in pts])
            colour = f"C{k}"
            ax.plot(ts, ys, color=colour, lw=0.8, alpha=0.6)
            ax.scatter([t for t, g in zip(ts, good) if g], ys[good], color=colour, s=14,
                       label=f"section {sec}")
            ax.scatter([t for t, g in zip(ts, good) if not g], ys[~good], facecolors="none",
                       edgecolors=colour, s=18, label=f"{sec}: not scored")
            s = result["sections"][sec]["metrics"].get(m, {})
            if s.get("baseline") is not None:
                b, sc = s["baseline"], s["scale"]
                ax.axhspan(b - 2 * sc, b + 2 * sc, color=colour, alpha=0.12)
                for lim in s.get("limits") or []:  # where the judgement puts them
                    ax.axhline(lim, color=colour, ls="--", lw=0.8)
        label, unit = LABELS[m]
        ax.set_ylabel(f"{label}\n{unit}".strip(), fontsize=8)
        ax.grid(True, alpha=0.25)
    axes[0].legend(fontsize=7, ncol=2)
    axes[0].set_title("trends: band = baseline +- 2 noise units, dashed = limit")
    fig.autofmt_xdate()
    fig.tight_layout()
    return fig


def write_report(store: Store, label: str, cfg: dict, path) -> dict:
    result = history(store, label, cfg)
    caps = result["captures"]
    e = html.escape
    parts = [
        "<!doctype html><html><head><meta charset='utf-8'>",
        f"<title>Heater report: {e(label)}</title>",
        "<style>body{font-family:sans-serif;max-width:52em;margin:2em auto;color:#222}"
        "table{border-collapse:collapse;font-size:0.85em}td,th{border:1px solid #ccc;"
        "padding:2px 6px;text-align:right}th{background:#eee}.status{font-size:1.3em}"
        ".note{color:#555;font-size:0.85em}</style></head><body>",
        f"<h1>Heater report: {e(label)}</h1>",
        f"<p>Type {e(result['type'] or 'unknown')}"
        + (f", owner {e(result['owner'])}" if result["owner"] else "")
        + f". Written {datetime.now(timezone.utc).date().isoformat()} by glowtrace.</p>",
        f"<p class='status'>Status: <b>{e(result['status'])}</b>"
        + (f" &nbsp; Grade: <b>{e(result['grade'])}</b>" if result["grade"] else "") + "</p>",
        f"<p class='note'>This is a {e(result['scope'])}.</p>",
        "<ul>" + "".join(f"<li>{e(r)}</li>" for r in result["reasons"]) + "</ul>",
        "<h2>Captures</h2><table><tr><th>date (UTC)</th><th>section</th>"
        "<th>cold R at 20 C, ohm</th><th>hot current at rated V, A</th>"
        "<th>inrush at rated V, x</th><th>warm-up 90 % at rated V, s</th>"
        "<th>flash index</th><th>scored</th></tr>",
    ]
    for c in caps:
        def f(k, d=4):
            v = c.get(k)
            return "-" if v is None else f"{v:.{d}g}"
        parts.append(f"<tr><td>{e(c['at'][:16].replace('T', ' '))}</td><td>{c['section']}</td>"
                     f"<td>{f('cold_resistance_20c_ohm')}</td><td>{f('rated_hot_current_a')}</td>"
                     f"<td>{f('rated_inrush_ratio', 3)}</td><td>{f('rated_warmup_90_s', 3)}</td>"
                     f"<td>{f('flash_index', 2)}</td><td>"
                     f"{'yes' if c['scored'] else e(c['excluded'] or 'no')}</td></tr>")
    parts.append("</table>")
    if caps:
        parts.append("<h2>Start-up curves</h2><img alt='start-up curves' src='data:image/png;"
                     f"base64,{_png(_curves_figure(store, caps))}'>")
        parts.append("<h2>Trends</h2><img alt='metric trends' src='data:image/png;base64,"
                     f"{_png(_trend_figure(result, caps))}'>")
    parts.append("<p class='note'>How the figures are measured: docs/ANALYSIS.md in "
                 "glowtrace. Cold resistance is compared at 20 C, so room temperature does "
                 f"not read as drift.</p><p class='note'>{e(CAUTION)}</p></body></html>")
    with outfile.replacing(Path(path), "w", encoding="utf-8") as fh:
        fh.write("\n".join(parts))
    return result
