"""Pictures: a start-up curve as a terminal plot (plotext) and a figure
(matplotlib), both on a log time axis, which suits a curve whose action is in
the first milliseconds and whose end is tens of seconds later; and a tube's
metric trends as terminal charts.

Terminal plots come back as text with ANSI colour; the command line decides
whether the colour reaches the screen."""

from pathlib import Path

import numpy as np

from .. import outfile

from ..analysis.curve import Curve


def _log_pick(t: np.ndarray, n: int) -> np.ndarray:
    """Indices of about n samples spread evenly in log time (t > 0)."""
    pos = np.nonzero(t > 0)[0]
    if len(pos) <= n:
        return pos
    targets = np.geomspace(t[pos[0]], t[pos[-1]], n)
    return np.unique(pos[np.clip(np.searchsorted(t[pos], targets), 0, len(pos) - 1)])


def terminal_plot(c: Curve, width: int = 100, height: int = 20, title: str = "") -> str:
    import plotext as plt
    k = _log_pick(c.t, 4 * width)
    plt.clear_figure()
    plt.plotsize(width, height)
    plt.xscale("log")
    plt.title(title or "heater current after switch-on")
    plt.xlabel("time after switch-on, s (log)")
    plt.plot(c.t[k].tolist(), c.i[k].tolist(), label="current, A", marker="braille")
    plt.theme("clear")
    return plt.build()


# each section its own colour and marker, the same as in the report's figures
# (matplotlib's C0 and C1): the letter itself marks the point, so the sections
# stay apart without colour
SECTION_MARKS = {"A": ("blue", "A"), "B": ("orange", "B")}
BAND_NOISE_UNITS = 2.0  # the band drawn around a baseline, in noise units


def trend_charts(result: dict, noise_floor: dict, width: int = 60, height: int = 14) -> list[str]:
    """One terminal chart per metric with at least two scored points: each
    section's points (its letter as marker, its colour), and for a section with
    two points or more its baseline's noise band (baseline +- 2 noise units,
    dotted) and its limit (x). The y axis always spans the band and the limit,
    so a change inside the noise looks like one."""
    import plotext as plt

    from ..judgement.scoring import LABELS, _parse_at
    charts = []
    scored = [c for c in result["captures"] if c["scored"]]
    if not scored:
        return charts
    t0 = min(_parse_at(c["at"]) for c in scored)
    for m, (label, unit) in LABELS.items():
        series = {}
        for c in scored:
            if c.get(m) is not None:
                days = (_parse_at(c["at"]) - t0).total_seconds() / 86400
                series.setdefault(c["section"], []).append((days, c[m]))
        if not any(len(v) >= 2 for v in series.values()):
            continue
        plt.clear_figure()
        plt.plotsize(width, height)
        plt.theme("clear")
        x_end = max(max(d for d, _ in v) for v in series.values()) or 1.0
        ys = [y for v in series.values() for _, y in v]
        # the band and limit first, so that the points are drawn over them
        for sec, pts in sorted(series.items()):
            if len(pts) < 2:
                continue
            colour = SECTION_MARKS.get(sec, ("green", sec[:1]))[0]
            s = result["sections"].get(sec, {}).get("metrics", {}).get(m, {})
            centre = s.get("baseline")
            if centre is None:  # no baseline yet: the noise around the median
                centre = sorted(y for _, y in pts)[len(pts) // 2]
            floor = noise_floor.get(m, 0.0) * (1.0 if m == "flash_index" else abs(centre))
            half = BAND_NOISE_UNITS * max(s.get("scale") or 0.0, floor)
            for y in (centre - half, centre + half):
                plt.plot([0, x_end], [y, y], marker=".", color=colour)
                ys.append(y)
            for lim in s.get("limits") or []:  # where the judgement puts them
                plt.plot([0, x_end], [lim] * 2, marker="x", color=colour)
                ys.append(lim)
        for sec, pts in sorted(series.items()):
            colour, mark = SECTION_MARKS.get(sec, ("green", sec[:1]))
            plt.scatter([d for d, _ in pts], [y for _, y in pts], marker=mark, color=colour)
        lo, hi = min(ys), max(ys)
        pad = 0.05 * (hi - lo or abs(hi) or 1.0)
        plt.ylim(lo - pad, hi + pad)
        plt.title(f"{label} ({unit})" if unit else label)
        secs = ", ".join(sorted(series))
        plt.xlabel(f"days since first capture   {secs}: sections   . noise band   x limit")
        charts.append(plt.build())
    return charts


def figure(c: Curve, analysis: dict, path, title: str = "") -> None:
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    k = _log_pick(c.t, 3000)
    t, i, v = c.t[k], c.i[k], c.v[k]
    r = np.where(i > 0.02 * max(i.max(), 1e-9), v / np.where(i > 0, i, 1), np.nan)
    panels = 3 if c.light is not None else 2
    fig, ax = plt.subplots(panels, 1, sharex=True, figsize=(8, 2.6 * panels + 0.6))
    ax[0].plot(t, i, lw=1.2, color="C0")
    ax[0].set_ylabel("current, A")
    if analysis.get("hot_current_a"):
        ax[0].axhline(analysis["hot_current_a"], color="0.5", lw=0.8, ls="--")
    ax[1].plot(t, r, lw=1.2, color="C1")
    ax[1].set_ylabel("resistance, ohm")
    for key, label in (("warmup_50_s", "50 %"), ("warmup_90_s", "90 %"),
                       ("settle_1pct_s", "settled 1 %")):
        x = analysis.get(key)
        if x:
            for a in ax[:2]:
                a.axvline(x, color="0.6", lw=0.8, ls=":")
            ax[1].annotate(label, (x, ax[1].get_ylim()[0]), rotation=90, fontsize=8,
                           va="bottom", ha="right", color="0.35")
    if c.light is not None:
        ax[2].plot(t, c.light[k], lw=1.2, color="C3")
        ax[2].set_ylabel("light, relative")
    ax[-1].set_xscale("log")
    ax[-1].set_xlabel("time after switch-on, s")
    for a in ax:
        a.grid(True, which="both", alpha=0.25)
    fi = analysis.get("flash_index")
    sub = f"flash index {fi:.3f}" if fi is not None else ""
    fig.suptitle((title + ("  -  " + sub if sub else "")).strip(" -"))
    fig.tight_layout()
    save(fig, path, 120)


def circuit_terminal_plot(run, plain, width: int = 100, height: int = 18) -> str:
    """Supply current after switch-on: the design and a plain switch-on."""
    import plotext as plt
    plt.clear_figure()
    plt.plotsize(width, height)
    plt.xscale("log")
    plt.title("supply current after switch-on")
    plt.xlabel("time after switch-on, s (log)")
    for r, label in ((plain, "plain switch-on, A"), (run, "this design, A")):
        k = r.t > 0
        plt.plot(r.t[k].tolist(), r.current[k].tolist(), label=label, marker="braille")
    plt.theme("clear")
    return plt.build()


def circuit_figure(run, plain, path, title: str = "") -> None:
    """Current, each heater's voltage and its exposed share's temperature,
    for the design (solid) and a plain switch-on (dotted)."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(3, 1, sharex=True, figsize=(8, 8.4))
    for r, style, what in ((run, "-", "design"), (plain, ":", "plain")):
        k = r.t > 0
        ax[0].plot(r.t[k], r.current[k], style, lw=1.2, color="C0", label=what)
        for j, name in enumerate(r.names):
            ax[1].plot(r.t[k], r.heater_v[j, k], style, lw=1.2, color=f"C{j + 1}",
                       label=f"{name} ({what})")
            ax[2].plot(r.t[k], r.exposed_k[j, k], style, lw=1.2, color=f"C{j + 1}")
    ax[0].set_ylabel("supply current, A")
    ax[1].set_ylabel("heater volts, V")
    ax[2].set_ylabel("exposed share, K")
    ax[-1].set_xscale("log")
    ax[-1].set_xlabel("time after switch-on, s")
    ax[0].legend(fontsize=8)
    ax[1].legend(fontsize=7)
    for a in ax:
        a.grid(True, which="both", alpha=0.25)
    fig.suptitle(title)
    fig.tight_layout()
    save(fig, path, 110)


def save(fig, path, dpi: int) -> None:
    """Write a figure in the format its suffix names (checked by
    outfile.check before the work), whole or not at all, and close it."""
    import matplotlib.pyplot as plt
    path = Path(path)
    try:
        with outfile.replacing(path, "wb") as f:
            fig.savefig(f, dpi=dpi, format=path.suffix.lstrip(".").lower() or "png")
    finally:
        plt.close(fig)


def string_terminal_plot(run, rated: list, width: int = 100, height: int = 18) -> str:
    """Each heater's voltage over its rating after switch-on."""
    import plotext as plt
    plt.clear_figure()
    plt.plotsize(width, height)
    plt.xscale("log")
    plt.title("heater volts over rated volts")
    plt.xlabel("time after switch-on, s (log)")
    k = run.t > 0
    for j, name in enumerate(run.names):
        plt.plot(run.t[k].tolist(), (run.heater_v[j, k] / rated[j]).tolist(), label=name,
                 marker="braille")
    plt.hline(1.1)
    plt.theme("clear")
    return plt.build()


def string_figure(run, rated: list, path, title: str = "") -> None:
    """Each heater's voltage over its rating against time, one colour each,
    with the 110 % line."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    fig, ax = plt.subplots(figsize=(8, 4.6))
    k = run.t > 0
    for j, name in enumerate(run.names):
        ax.plot(run.t[k], run.heater_v[j, k] / rated[j], lw=1.3, color=f"C{j}", label=name)
    ax.axhline(1.1, color="0.4", lw=0.8, ls="--", label="110 % of rated")
    ax.set_xscale("log")
    ax.set_xlabel("time after switch-on, s")
    ax.set_ylabel("heater volts / rated volts")
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=8)
    fig.suptitle(title)
    fig.tight_layout()
    save(fig, path, 110)
