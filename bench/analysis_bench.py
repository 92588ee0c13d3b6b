"""Analysis benchmark (not a test):
    .venv/bin/python bench/analysis_bench.py [--runs N]
Analyses a ~10k-sample start-up curve (a 100 s simulated tester capture of a
12AX7 section; one even heater, one that flashes) with every metric and the
model fit, and prints the median time next to two baselines timed in the
same run:
  - a fair one: the very same analysis (same bins, model, bounds and
    least_squares settings) with only the fit's integrator swapped for
    scipy's solve_ivp (LSODA, rtol 1e-5), and so its Jacobian by forward
    differences over solve_ivp runs in place of the compiled complex step;
    the ratio for the whole analysis and for the fit alone;
  - a straightforward one: least_squares with solve_ivp integrating the
    two-node model over every sample (rtol 1e-7), as someone might first
    write it (not the same work: kept for comparison with earlier runs)."""

import argparse
import statistics
import sys
import time
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp
from scipy.optimize import least_squares

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "tests"))

from glowtrace import catalogue  # noqa: E402
from glowtrace.analysis.analyze import analyze_curve  # noqa: E402
from glowtrace.analysis.curve import from_capture  # noqa: E402
from glowtrace.analysis.thermal import ThermalModel  # noqa: E402
from glowtrace.analysis import stepper  # noqa: E402
from glowtrace.analysis.physics.tungsten import HeaterWire  # noqa: E402
from simhelp import sim_tester  # noqa: E402


def capture_curve(**sim):
    with sim_tester(**sim) as t:
        raw = t.capture("B", "A", {"max_s": 100, "settle_band": 1e-5})
    return from_capture(raw)["A"], raw.ambient_c


def baseline_fit(c, ambient_c, m):
    """least_squares over (r_hot, dt_ws, tau_w, tau_s); each evaluation
    integrates the two-node model with solve_ivp, driven by the measured
    current interpolated between samples, and compares at every sample."""
    on = c.t > 0
    t, i = c.t[on], c.i[on]
    r_meas = c.v[on] / i
    wire = HeaterWire(1.0)
    ta = ambient_c + 273.15

    def residual(x):
        model = ThermalModel(r20=m["cold_resistance_20c_ohm"], k=1.0, t_amb_k=ta,
                             p_hot=m["hot_power_w"] * m["hot_resistance_ohm"] / np.exp(x[0]),
                             r_hot=np.exp(x[0]), dt_ws=np.exp(x[1]), tau_w=np.exp(x[2]),
                             tau_s=np.exp(x[3]))
        _, g, k_s, c_w, c_s, _, _, _ = model.constants()

        def rhs(tt, y):
            ii = np.interp(tt, t, i)
            return [(ii * ii * model.r20 * wire.ratio(y[0]) - g * (y[0] - y[1])) / c_w,
                    (g * (y[0] - y[1]) - k_s * (y[1] ** 4 - ta ** 4)) / c_s]
        sol = solve_ivp(rhs, (0, t[-1]), [ta, ta], method="LSODA", t_eval=t, rtol=1e-7,
                        atol=1e-4)
        if not sol.success or sol.y.shape[1] != len(t):
            return np.full(len(t), 1e3)
        return model.r20 * wire.ratio(sol.y[0]) - r_meas
    x0 = np.log([m["hot_resistance_ohm"], 150.0, 0.5, 3.0])
    # finite-difference steps well above the integrator's tolerance
    return least_squares(residual, x0, xtol=1e-4, ftol=1e-6, max_nfev=60, diff_step=1e-3)


def solve_ivp_resistance(edges, i2, c, rt, st, t0, dt, start_k):
    """stepper.under_current with scipy's solve_ivp in place of the compiled
    stepper: the same three nodes and constants, the same tungsten table,
    the same piecewise-constant current per interval, the same mean of the
    resistances at an interval's two ends."""
    g, k_s, c_w, c_s, k_x, c_x, ta4, r20m, r20x = (float(x.real) for x in c)
    n = len(rt) - 1

    def a(t):
        k = min(max(int((t - t0) / dt), 0), n)
        return rt[k] + (t - t0 - k * dt) * st[k]

    def rhs(t, y):
        k = min(max(int(np.searchsorted(edges, t, side="right")) - 1, 0), len(i2) - 1)
        q = i2[k]
        tw, ts, tx = y
        return [(q * r20m * a(tw) - g * (tw - ts)) / c_w,
                (g * (tw - ts) - k_s * (ts ** 4 - ta4)) / c_s,
                (q * r20x * a(tx) - k_x * (tx ** 4 - ta4)) / c_x if r20x else 0.0]
    sol = solve_ivp(rhs, (edges[0], edges[-1]), [start_k] * 3, method="LSODA", t_eval=edges,
                    rtol=1e-5, atol=1e-3, first_step=min(1e-6, edges[1] / 10))
    if not sol.success or sol.y.shape[1] != len(edges):
        return np.full(len(i2), 1e6)
    r = np.array([r20m * a(x) for x in sol.y[0]]) \
        + (np.array([r20x * a(x) for x in sol.y[2]]) if r20x else 0.0)
    return 0.5 * (r[1:] + r[:-1])


FD_STEP = 1e-3  # in the log parameters: solve_ivp's tolerance turns smaller steps to noise


def solve_ivp_jacobian(edges, i2, cs, rt, st, t0, dt, start_k):
    """The Jacobian by forward differences over solve_ivp integrations (one
    per parameter, as least_squares' own '2-point' would), the constants
    moved by FD_STEP along each parameter's direction."""
    base = cs[0].real.copy()
    r0 = solve_ivp_resistance(edges, i2, base, rt, st, t0, dt, start_k)
    cols = []
    for row in cs:
        moved = base + FD_STEP * row.imag / stepper.COMPLEX_STEP
        cols.append((solve_ivp_resistance(edges, i2, moved, rt, st, t0, dt, start_k) - r0)
                    / FD_STEP)
    return np.array(cols).T


def timed(fn, runs):
    times, out = [], None
    for _ in range(runs):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), out


def fair(cases, ax7, runs):
    """The same analysis and the same fit, only the integrator swapped."""
    from glowtrace.analysis import thermal
    own = stepper.under_current, stepper.under_current_jacobian
    for name, (c, amb) in cases.items():
        on = c.t > 0
        b = thermal.bin_curve(c.t[on], c.i[on], c.v[on] / c.i[on])
        m = analyze_curve(c, amb, ax7)
        flash = bool(m["flash_index"])

        def one_fit():
            return thermal.fit(b, m["cold_resistance_20c_ohm"], 1.0, amb + 273.15,
                               m["hot_resistance_ohm"], m["hot_power_w"] / m["hot_current_a"],
                               flash=flash)
        ours_all, _ = timed(lambda: analyze_curve(c, amb, ax7), runs)
        ours_fit, f1 = timed(one_fit, runs)
        stepper.under_current = solve_ivp_resistance
        stepper.under_current_jacobian = solve_ivp_jacobian
        try:
            base_all, mb = timed(lambda: analyze_curve(c, amb, ax7), 1)
            base_fit, f2 = timed(one_fit, 1)
        finally:
            stepper.under_current, stepper.under_current_jacobian = own
        print(f"fair baseline, {name}: whole analysis {base_all:.2f} s against "
              f"{1000 * ours_all:.1f} ms = {base_all / ours_all:.0f}x; the fit alone "
              f"({'flash' if flash else 'even'} model, {f2.nfev} evaluations against "
              f"{f1.nfev}) {base_fit:.2f} s against {1000 * ours_fit:.1f} ms = "
              f"{base_fit / ours_fit:.0f}x; tau_s {f2.model.tau_s:.3f} against "
              f"{f1.model.tau_s:.3f} s, flash index {mb['flash_index']} against "
              f"{m['flash_index']}")


def main():
    ap = argparse.ArgumentParser(description="analysis benchmark")
    ap.add_argument("--runs", type=int, default=7)
    ap.add_argument("--naive", action="store_true",
                    help="also the straightforward baseline (minutes)")
    args = ap.parse_args()
    ax7 = catalogue.load().get("12AX7")
    cases = {"even heater": capture_curve(tube="12AX7", seed=2),
             "flashing heater": capture_curve(tube="12AX7", flash_a=0.1, seed=3)}
    ours = {}
    for name, (c, amb) in cases.items():
        times = []
        for _ in range(args.runs):
            t0 = time.perf_counter()
            m = analyze_curve(c, amb, ax7)
            times.append(time.perf_counter() - t0)
        ours[name] = (statistics.median(times), m)
        print(f"{name}: {len(c.t)} samples; glowtrace analysis (all metrics, fit, "
              f"predictions): median {1000 * statistics.median(times):.1f} ms over "
              f"{args.runs} runs; flash index {m['flash_index']}, "
              f"fit rms {m['thermal_model']['fit_rms']:.2f} x noise")
    fair(cases, ax7, args.runs)
    if not args.naive:
        return
    c, amb = cases["even heater"]
    m = ours["even heater"][1]
    t0 = time.perf_counter()
    res = baseline_fit(c, amb, m)
    base = time.perf_counter() - t0
    fit_only = []
    from glowtrace.analysis import thermal
    on = c.t > 0
    b = thermal.bin_curve(c.t[on], c.i[on], c.v[on] / c.i[on], n_bins=60)
    for _ in range(args.runs):
        t1 = time.perf_counter()
        thermal.fit(b, m["cold_resistance_20c_ohm"], 1.0, amb + 273.15,
                    m["hot_resistance_ohm"], m["hot_power_w"] / m["hot_current_a"], flash=False)
        fit_only.append(time.perf_counter() - t1)
    print(f"baseline (solve_ivp inside least_squares, even heater model only): "
          f"{base:.2f} s, {res.nfev} evaluations; tau_s {np.exp(res.x[3]):.3f} s vs "
          f"ours {m['thermal_model']['tau_s']:.3f} s")
    print(f"ratio, same fit: baseline / glowtrace fit = "
          f"{base / statistics.median(fit_only):.0f}x "
          f"(glowtrace fit alone {1000 * statistics.median(fit_only):.1f} ms); "
          f"baseline / whole glowtrace analysis = {base / ours['even heater'][0]:.0f}x")


if __name__ == "__main__":
    main()
