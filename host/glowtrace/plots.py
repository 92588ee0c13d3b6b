"""Pictures of a start-up curve: a terminal plot (plotext) and a figure
(matplotlib), both on a log time axis, which suits a curve whose action is
in the first milliseconds and whose end is tens of seconds later."""

import numpy as np

from .analysis.curve import Curve


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
    fig.savefig(path, dpi=120)
    plt.close(fig)
