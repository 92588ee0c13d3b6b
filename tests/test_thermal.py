"""The fitted thermal model: integration against scipy's solve_ivp, fits that
a series resistor does not bias, and the flash indicator."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from glowtrace import catalogue
from glowtrace.analysis.analyze import analyze_capture, analyze_curve
from glowtrace.analysis.curve import Curve
from glowtrace.analysis.metrics import first_crossing
from glowtrace.analysis.thermal import ThermalModel
from glowtrace.analysis.physics.tungsten import HeaterWire
from curves import sample_times
from simhelp import sim_tester

TRUE = ThermalModel(r20=6.2, k=0.95, t_amb_k=295.15, r_hot=42.0, p_hot=0.945,
                    dt_ws=140.0, tau_w=0.6, tau_s=3.0, f=0.0, tau_x=0.1)


def reference(model: ThermalModel, v_supply: float, r_series: float, t_eval):
    """The model's equations integrated by scipy (Radau, tight tolerances):
    an integrator the project did not write. Vectorised (y of shape (3, k)),
    so Radau's Jacobian and the resistances are array calls."""
    _, g, k_s, c_w, c_s, k_x, c_x, _ = model.constants()
    wire = HeaterWire(model.k)
    ta = model.t_amb_k
    rm, rx = model.r20 * (1 - model.f), model.r20 * model.f

    def res(y):
        return rm * wire.ratio(y[0]) + rx * wire.ratio(y[2])

    def rhs(t, y):
        i = v_supply / (r_series + res(y))
        exposed = (i * i * rx * wire.ratio(y[2]) - k_x * (y[2] ** 4 - ta ** 4)) / c_x \
            if rx else 0.0 * y[2]
        return np.array([(i * i * rm * wire.ratio(y[0]) - g * (y[0] - y[1])) / c_w,
                         (g * (y[0] - y[1]) - k_s * (y[1] ** 4 - ta ** 4)) / c_s,
                         exposed])
    sol = solve_ivp(rhs, (0, t_eval[-1]), [ta, ta, ta], method="Radau", t_eval=t_eval,
                    rtol=1e-8, atol=1e-6, first_step=1e-7, vectorized=True)
    r = res(sol.y)
    i = v_supply / (r_series + r)
    return r, i


@pytest.mark.parametrize("f", [0.0, 0.1])
def test_integration_matches_solve_ivp(f):
    m = ThermalModel(**{**TRUE.__dict__, "f": f})
    t, r, _, _ = m.in_circuit(6.3, 0.0, t_end=40.0, n=400)
    check = np.array([0.01, 0.1, 0.5, 1.0, 3.0, 10.0, 40.0])
    r_ref, _ = reference(m, 6.3, 0.0, check)
    assert np.allclose(np.interp(check, t, r), r_ref, rtol=0.005)


def _measured(model, v_supply, r_series, noise, seed=1):
    t = sample_times(40.0)
    on = t >= 0
    r, i = reference(model, v_supply, r_series, t[on])
    rng = np.random.default_rng(seed)
    i_all = np.zeros(len(t))
    i_all[on] = i * (1 + noise * rng.standard_normal(on.sum()))
    v_all = np.full(len(t), v_supply)
    v_all[on] = i * r * (1 + noise * rng.standard_normal(on.sum()))
    return Curve(t, v_all, i_all)


def test_series_resistor_in_the_test_does_not_bias_the_fit():
    # measured behind 4 x 6.3 V and 3 x 42 ohm (heavy current limiting), with
    # 0.2 % noise; predictions at rated voltage from a stiff supply must match
    # the same heater integrated by solve_ivp at rated voltage
    c = _measured(TRUE, 4 * 6.3, 3 * 42.0, 0.002)
    m = analyze_curve(c, ambient_c=22.0, rated_v=6.3, rated_a=0.15, tube_type=None)
    fitted = m["thermal_model"]
    assert fitted["tau_s"] == pytest.approx(TRUE.tau_s, rel=0.08)
    assert fitted["tau_w"] == pytest.approx(TRUE.tau_w, rel=0.25)
    t = np.geomspace(1e-4, 60, 4000)
    r_true, _ = reference(TRUE, 6.3, 0.0, t)
    w90 = first_crossing(t, r_true, r_true[0] + 0.9 * (r_true[-1] - r_true[0]))
    assert m["rated_warmup_90_s"] == pytest.approx(w90, rel=0.05)
    # and the measured warm-up, slowed by the series resistor, is not that
    assert m["warmup_90_s"] > 1.2 * w90


def test_fit_reproduces_independent_curve_within_noise():
    c = _measured(TRUE, 6.3, 0.05, 0.001)
    m = analyze_curve(c, ambient_c=22.0, rated_v=6.3, rated_a=0.15)
    assert m["thermal_model"]["fit_rms"] < 2.0
    assert m["flash_index"] == 0.0


@pytest.mark.parametrize("tube", ["12AX7", "6V6"])
def test_fit_reproduces_simulated_heater_within_noise(tube):
    with sim_tester(tube=tube, seed=3) as t:
        raw = t.capture("T", "A", {})
    a = analyze_capture(raw, catalogue.load().get(tube))["sections"]["A"]
    assert a["thermal_model"]["fit_rms"] < 2.0
    assert a["warnings"] == []


def test_flash_index_follows_the_exposed_share():
    found = []
    for share in (0.0, 0.03, 0.12):
        with sim_tester(tube="12AX7", flash_a=share, seed=9) as t:
            raw = t.capture("T", "A", {})
        found.append(analyze_capture(raw, catalogue.load().get("12AX7"))
                     ["sections"]["A"]["flash_index"])
    assert found[0] < 0.005
    assert found[1] == pytest.approx(0.03, rel=0.25)
    assert found[2] == pytest.approx(0.12, rel=0.15)


def test_flash_shows_in_an_independent_curve_too():
    flashing = ThermalModel(**{**TRUE.__dict__, "f": 0.08, "tau_x": 0.15})
    m = analyze_curve(_measured(flashing, 6.3, 0.05, 0.001), 22.0, rated_v=6.3, rated_a=0.15)
    assert m["flash_index"] == pytest.approx(0.08, rel=0.2)


def test_section_imbalance_of_a_dual_heater():
    with sim_tester(tube="12AX7", seed=4) as t:
        raw = t.capture("T", "AB", {})
    a = analyze_capture(raw, catalogue.load().get("12AX7"))
    ra = a["sections"]["A"]["hot_resistance_ohm"]
    rb = a["sections"]["B"]["hot_resistance_ohm"]
    assert a["section_imbalance"] == pytest.approx(abs(ra - rb) / ((ra + rb) / 2), rel=1e-4)
    assert a["section_imbalance"] < 0.03  # matched sections, converter gain errors only


def test_complex_step_jacobian_matches_central_differences():
    # the fit's exact derivatives against plain central differences of the
    # real integration (step 1e-5 in the log parameters), for every fitted
    # parameter of the flash model
    from glowtrace.analysis import stepper, thermal
    flashing = ThermalModel(**{**TRUE.__dict__, "f": 0.08, "tau_x": 0.15})
    edges = np.concatenate([[0.0], np.geomspace(1e-3, 40.0, 60)])
    i2 = np.interp(edges[1:], *_curve_i2(flashing))
    tab = flashing._table()
    names = ["r_hot", "dt_ws", "tau_w", "tau_s", "f", "tau_x"]
    base = {n: getattr(flashing, n) for n in names}

    def pack(moved):
        p = dict(base, **moved)
        return thermal.derived(flashing.r20, flashing.k, flashing.t_amb_k,
                               p_hot=flashing.p_hot, **p)
    rows = [pack({n: base[n] * complex(np.exp(1j * stepper.COMPLEX_STEP))}) for n in names]
    jac = stepper.under_current_jacobian(edges, i2, np.array(rows, complex), *tab,
                                         flashing.t_amb_k)
    for j, n in enumerate(names):
        up, down = (stepper.under_current(edges, i2, np.array(pack({n: base[n] * np.exp(s)})),
                                          *tab, flashing.t_amb_k) for s in (1e-5, -1e-5))
        fd = (up - down) / 2e-5
        assert np.allclose(jac[:, j], fd, rtol=1e-4, atol=1e-6 * np.abs(fd).max()), n


def _curve_i2(model):
    t, _, i, _ = model.in_circuit(6.3, 0.0, t_end=40.0, n=200)
    return t, i * i


def test_pure_python_fallback_gives_the_same_figures(tmp_path):
    # the same analysis with numba turned off (the fallback when it cannot
    # install) in a fresh interpreter: every figure equal to 6 digits
    import json
    import subprocess
    import sys
    from glowtrace.analysis import stepper
    from glowtrace.analysis.csvio import write_curve
    if not stepper.COMPILED:
        pytest.skip("numba is not installed: only the fallback runs here")
    c = _measured(ThermalModel(**{**TRUE.__dict__, "f": 0.08, "tau_x": 0.15}), 6.3, 0.05, 0.001)
    path = tmp_path / "curve.csv"
    write_curve(path, c)
    code = ("import json, sys; from glowtrace.analysis.analyze import analyze_file; "
            "from glowtrace.analysis import stepper; "
            "_, m = analyze_file(sys.argv[1], 22.0, rated_v=6.3, rated_a=0.15); "
            "print(json.dumps([stepper.COMPILED, m]))")
    runs = {}
    for off in ("", "1"):
        env = dict(__import__("os").environ, GLOWTRACE_NO_NUMBA=off)
        out = subprocess.run([sys.executable, "-c", code, str(path)], env=env, check=True,
                             capture_output=True, text=True).stdout
        compiled, runs[off] = json.loads(out)
        assert compiled == (not off)
    assert runs["1"]["thermal_model"].pop("fit_evaluations") > 0
    runs[""]["thermal_model"].pop("fit_evaluations")
    fallback, compiled = runs["1"], runs[""]
    fallback.update(fallback.pop("thermal_model"))
    compiled.update(compiled.pop("thermal_model"))
    assert fallback.keys() == compiled.keys()
    for k, x in compiled.items():  # 6 digits: the figures are stored rounded to 6
        assert fallback[k] == (pytest.approx(x, rel=2e-6) if isinstance(x, float) else x), k
    assert compiled["flash_index"] == pytest.approx(0.08, rel=0.2)
