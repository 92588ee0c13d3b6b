"""The circuit simulation over fitted heater models and `glowtrace softstart`.

Checks, each with its source:
- Ohm's and Kirchhoff's laws at switch-on (closed form): the first current is
  the supply over the source, the resistor and the heaters' cold resistances.
- A plain switch-on at rated voltage reproduces the analysis's own rated
  figures (`rated_peak_current_a`, `rated_warmup_90_s`): one model, two paths.
- Tube data's series-string warm-up test circuit (four times rated volts
  through three times rated volts over rated amps; heater volts to 80 % of
  rated, as published tube data define it; from memory) reproduces the
  analysis's `series_warmup_s`.
- Energy balance (conservation of energy): what the supply delivers is what
  the source, the resistor and the heaters take; what a heater takes is what
  its nodes store plus what they radiate.
- Symmetry: two equal heaters in series on twice the voltage behave as one on
  the voltage.
"""

import json
import math

import numpy as np
import pytest

from glowtrace.analysis.analyze import analyze_curve
from glowtrace.analysis.csvio import write_curve
from glowtrace.analysis.thermal import ThermalModel
from glowtrace.circuits.simulate import Circuit, CircuitError, Heater, energy, simulate
from glowtrace.circuits.softstart import evaluate
from glowtrace.cli import main

from curves import heater
from simhelp import sim_url


@pytest.fixture(scope="module")
def fitted():
    """A 12AX7-like section with a flashing share, fitted by the analysis."""
    res = analyze_curve(heater(seed=1, f=0.05), 22.0, None, 6.3, 0.3)
    return res, Heater("T", ThermalModel.from_dict(res["thermal_model"]), 6.3, 0.3)


def test_switch_on_obeys_ohms_law(fitted):
    _, h = fitted
    m = h.model
    for c in (Circuit(6.3, 0.2), Circuit(6.3, 0.2, 10.0, 1.0), Circuit(12.6, 0.1, series=True)):
        hs = [h, h] if c.series else [h, h, h]
        run = simulate(c, hs, t_end=1.0)
        r_cold = m.r20  # from 20 C: the model's resistance is r20 there
        load = 2 * r_cold if c.series else r_cold / 3
        assert run.current[0] == pytest.approx(c.supply_v / (c.source_ohm + c.series_ohm + load),
                                               rel=1e-9)


def test_plain_switch_on_reproduces_the_rated_figures(fitted):
    res, h = fitted
    run = simulate(Circuit(6.3), [h], t_end=60.0)
    assert run.current.max() == pytest.approx(res["rated_peak_current_a"], rel=1e-5)  # 6 digits
    from glowtrace.circuits.simulate import warmup_90
    run = simulate(Circuit(6.3), [h], t_end=60.0, from_k=None)  # from the fit's own room
    assert warmup_90(run.t, run.heater_r[0]) == pytest.approx(res["rated_warmup_90_s"], rel=0.01)


def test_series_warmup_test_circuit_reproduces_the_analysis(fitted):
    res, h = fitted
    v, a = 6.3, 0.3
    run = simulate(Circuit(4 * v, 3 * v / a), [h], t_end=80.0, from_k=None)
    vh = run.heater_v[0]
    k = int(np.nonzero(vh >= 0.8 * v)[0][0])
    t80 = run.t[k - 1] + (0.8 * v - vh[k - 1]) / (vh[k] - vh[k - 1]) * (run.t[k] - run.t[k - 1])
    assert t80 == pytest.approx(res["series_warmup_s"], rel=0.01)


def test_energy_balance_of_every_element(fitted):
    _, h = fitted
    c = Circuit(6.3, 0.3, 12.0, bypass_s=2.0)
    run = simulate(c, [h, h], t_end=40.0, n=1500)
    heat = sum(energy(run.t, run.heater_i[j] * run.heater_v[j]) for j in range(2))
    parts = energy(run.t, run.resistor_w) + energy(run.t, run.source_w) + heat
    assert parts == pytest.approx(energy(run.t, run.supply_w), rel=2e-3)
    # a heater's electrical energy goes into its nodes' heat and their radiation
    a, g, k_s, c_w, c_s, k_x, c_x, _ = h.model.constants()
    ta = h.model.t_amb_k
    t0 = 293.15
    stored = (c_w * (run.wire_k[0, -1] - t0) + c_s * (run.sleeve_k[0, -1] - t0)
              + (c_x * (run.exposed_k[0, -1] - t0) if h.model.f else 0.0))
    radiated = energy(run.t, k_s * (run.sleeve_k[0] ** 4 - ta ** 4)
                      + k_x * (run.exposed_k[0] ** 4 - ta ** 4))
    electrical = energy(run.t, run.heater_i[0] * run.heater_v[0])
    assert stored + radiated == pytest.approx(electrical, rel=0.02)


def test_two_equal_heaters_in_series_share_the_voltage(fitted):
    _, h = fitted
    one = simulate(Circuit(6.3), [h], t_end=30.0)
    two = simulate(Circuit(12.6, series=True), [h, h], t_end=30.0)
    assert np.allclose(two.heater_v[0], one.heater_v[0], rtol=1e-9)
    assert np.allclose(two.current, one.current, rtol=1e-9)


def test_a_preheat_resistor_lowers_the_inrush_and_the_flash(fitted):
    _, h = fitted
    out, run, plain = evaluate(Circuit(6.3, 0.05, 10.0, bypass_s=3.0), [h])
    assert out["peak_current_before_bypass_a"] < 0.5 * out["plain"]["peak_current_a"]
    assert out["peak_current_after_bypass_a"] < out["plain"]["peak_current_a"]
    assert out["flash_peak_k"] < out["plain"]["flash_peak_k"]
    assert out["flash_settled_k"] == pytest.approx(out["plain"]["flash_settled_k"], rel=1e-3)
    # the resistor's energy: its own integral, and below what the supply gave
    assert out["resistor_energy_j"] == pytest.approx(energy(run.t, run.resistor_w))
    assert out["resistor_peak_power_w"] == pytest.approx(
        out["peak_current_before_bypass_a"] ** 2 * 10.0, rel=1e-9)
    # a bypass that closes at once is nearly a cold start again: said so
    early, _, _ = evaluate(Circuit(6.3, 0.05, 10.0, bypass_s=0.002), [h])
    assert any("nearly cold" in w for w in early["warnings"])


def test_a_ramp_lowers_the_inrush(fitted):
    _, h = fitted
    out, _, _ = evaluate(Circuit(6.3, 0.05, ramp_s=2.0), [h])
    assert out["peak_current_a"] < 0.6 * out["plain"]["peak_current_a"]
    assert out["warmup_90_s"] > out["plain"]["warmup_90_s"]


@pytest.mark.parametrize("kw", [{"supply_v": -1}, {"supply_v": 6.3, "series_ohm": -2},
                                {"supply_v": 6.3, "bypass_s": 0}, {"supply_v": math.nan}])
def test_impossible_circuits_are_refused(fitted, kw):
    with pytest.raises(CircuitError):
        simulate(Circuit(**kw), [fitted[1]])


KEYS = {"peak_current_a", "peak_current_before_bypass_a", "heater_volts_at_bypass",
        "peak_current_after_bypass_a", "resistor_peak_power_w", "resistor_energy_j",
        "flash_peak_k", "flash_settled_k", "warmup_90_s", "plain", "warnings"}


def test_softstart_command_on_a_stored_tube_and_a_csv(tmp_path, capsys):
    db = str(tmp_path / "b.db")
    assert main(["capture", "--port", sim_url(tube="12AX7", flash_a=0.08), "--tube", "F1",
                 "--type", "12AX7", "--section", "A", "--db", db]) == 0
    capsys.readouterr()
    assert main(["softstart", "F1", "--series-ohm", "10", "--bypass-s", "3", "--db", db,
                 "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert KEYS <= set(out) and out["supply_v"] == 6.3
    assert out["flash_peak_k"] is not None and out["flash_peak_k"] < out["plain"]["flash_peak_k"]
    csv = tmp_path / "c.csv"
    write_curve(csv, heater(seed=3))
    assert main(["softstart", str(csv), str(csv), "--type", "12AX7", "--ambient-c", "22",
                 "--ramp-s", "1", "--db", db, "--plot", str(tmp_path / "s")]) == 0
    o, err = capsys.readouterr()
    assert "2 heater(s) in parallel" in " ".join(o.split()) and "isolation transformer" in o
    assert (tmp_path / "s.png").stat().st_size > 1000


@pytest.mark.parametrize("argv,words", [
    (["softstart", "NOPE"], "no CSV file, tube label or capture"),
    (["softstart", "O1"], "no cold start with a fitted thermal model"),
    (["softstart", "O1", "--bypass-s", "2"], "needs --series-ohm"),
    (["softstart", "O1", "--series-ohm", "5", "--ramp-s", "2"], "either"),
])
def test_softstart_bad_input(tmp_path, capsys, argv, words):
    db = tmp_path / "b.db"
    main(["capture", "--port", sim_url(tube="12AX7", fault="open"), "--tube", "O1",
          "--type", "12AX7", "--section", "A", "--db", str(db)])
    capsys.readouterr()
    before = db.read_bytes()
    assert main([*argv, "--db", str(db)]) == 1
    err = capsys.readouterr().err
    assert words in " ".join(err.split()) and "Traceback" not in err
    assert db.read_bytes() == before
