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
    (["softstart", "O1", "--series-ohm", "5", "--ramp-s", "2"], "give one design"),
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


# NTC, MOSFET, recommendation, strings ---------------------------------------
def test_ntc_follows_its_b_parameter_equation_and_heats_itself():
    """The B-parameter equation R(T) = R25 exp(B (1/T - 1/T25)) (the form NTC
    data sheets give): R25 at 25 C, and B recovered from two temperatures;
    self-heating settles at the room plus power over the dissipation constant."""
    from glowtrace.circuits.simulate import Ntc
    n = Ntc(r25=10.0, beta=3500.0, dissipation_w_per_k=0.012, tau_s=40.0)
    assert n.resistance(298.15) == pytest.approx(10.0)
    t1, t2 = 273.15 + 25, 273.15 + 85
    assert math.log(n.resistance(t1) / n.resistance(t2)) / (1 / t1 - 1 / t2) == \
        pytest.approx(3500.0)
    t = 293.15
    for _ in range(200):
        t = n.step(t, 0.6, 5.0, 293.15)
    assert t == pytest.approx(293.15 + 0.6 / 0.012, abs=1e-6)
    assert n.step(300.0, 0.0, 40.0, 293.15) == pytest.approx(293.15 + 6.85 / math.e)


def test_ntc_and_mosfet_keep_the_energy_balance(fitted):
    from glowtrace.circuits.simulate import Mosfet, Ntc
    _, h = fitted
    for c in (Circuit(6.3, 0.1, ntc=Ntc(10.0, 3000, 0.01, 30)),
              Circuit(6.3, 0.1, mosfet=Mosfet(1e5, 1e-5, 16.3, 3.0))):
        run = simulate(c, [h, h], t_end=40.0)
        extra = run.ntc_w if run.ntc_w is not None else run.mosfet_w
        heat = sum(energy(run.t, run.heater_i[j] * run.heater_v[j]) for j in range(2))
        assert heat + energy(run.t, run.source_w) + energy(run.t, extra) == \
            pytest.approx(energy(run.t, run.supply_w), rel=1e-9)
        assert run.current.max() < 0.6 * simulate(Circuit(6.3, 0.1), [h, h], 1.0).current.max()


def test_the_follower_reaches_the_supply_when_the_gate_says(fitted):
    """Gate charged through R into C from Vd: the heaters get the supply once
    Vd (1 - exp(-t/RC)) - Vth reaches it (closed form)."""
    from glowtrace.circuits.simulate import Mosfet
    _, h = fitted
    m = Mosfet(1e5, 1e-5, 16.3, 3.0, rds_on=0.0)
    t_full = -1.0 * math.log(1 - (6.3 + 3.0) / 16.3)
    c = Circuit(6.3, mosfet=m)
    assert c.supply_at(0.5 * t_full) < 6.3 and c.supply_at(1.01 * t_full) == 6.3
    assert c.supply_at(0.5 * t_full) == pytest.approx(16.3 * (1 - math.exp(-0.5 * t_full)) - 3)


def test_the_recommendation_uses_preferred_values_and_beats_a_plain_start(fitted):
    """Preferred values of IEC 60063: E12 is 1.0 1.2 1.5 1.8 2.2 2.7 3.3 3.9 4.7
    5.6 6.8 8.2 per decade (the eseries package holds the tables)."""
    from glowtrace.circuits.recommend import recommend
    e12 = {1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2}
    _, h = fitted
    for kind in ("series", "ramp"):
        rec = recommend([h], Circuit(6.3, 0.05), kind)["recommended"]
        value = rec["series_ohm"] if kind == "series" else rec["gate_ohm"]
        assert round(value / 10 ** math.floor(math.log10(value)), 1) in e12
        plain = evaluate(Circuit(6.3, 0.05), [h])[0]
        assert rec["flash_peak_k"] < plain["flash_peak_k"] - 300
        assert rec["warmup_90_s"] <= rec["max_warmup_s"] and rec["why"]
    assert rec["caution"].startswith("choose a MOSFET rated for linear operation")
    series = recommend([h], Circuit(6.3, 0.05), "series", max_warmup_s=13.0)["recommended"]
    assert series["warmup_90_s"] <= 13.0
    assert series["resistor_rating_w"] >= 2 * series["resistor_power_if_never_bypassed_w"]
    assert series["bypass_switch_rating_a"] >= series["peak_current_a"]


def test_a_type_model_is_set_to_its_rated_warmup():
    """Controlled warm-up types are rated about 11 s (from memory of published
    tube data) in the series warm-up test circuit: the typical model of such a
    type meets its rating."""
    from glowtrace.analysis.analyze import predict
    from glowtrace.circuits.string import typical_model
    m, notes = typical_model("12BA6")
    assert predict(m, 12.6, 0.15, t_end=120.0)["series_warmup_s"] == pytest.approx(11, rel=0.02)
    assert "not a measured tube" in notes[0]


def test_string_command(tmp_path, capsys):
    db = str(tmp_path / "s.db")
    rc = main(["string", "12BE6", "12BA6", "12AV6", "50C5", "35W4", "--supply-v", "130",
               "--db", db, "--json", "--plot", str(tmp_path / "s.png")])
    assert rc == 0
    out = json.loads(capsys.readouterr().out)
    assert [h["tube"] for h in out["heaters"]] == ["12BE6", "12BA6", "12AV6", "50C5", "35W4"]
    for h in out["heaters"]:
        assert set(h) >= {"tube", "type", "rated_volts", "peak_volts", "peak_ratio",
                          "peak_at_s", "settled_volts", "over_110pct_s"}
        assert h["peak_ratio"] == pytest.approx(h["peak_volts"] / h["rated_volts"])
    assert out["worst"] in [h["tube"] for h in out["heaters"]]
    # 130 V across 122.8 V of heaters: a dropper of (130 - 122.8) / 0.15 A, an E24 value
    dropper = out["remedies"][0]
    assert dropper["remedy"] == "dropper" and dropper["series_ohm"] == 47.0
    assert dropper["worst_peak_ratio"] < out["worst_peak_ratio"]
    assert any("typical model" in w for w in out["warnings"])
    assert (tmp_path / "s.png").stat().st_size > 1000


@pytest.mark.parametrize("argv,words", [
    (["string", "12AX7", "6V6", "--supply-v", "12.6"], "one current rating"),
    (["string", "12BA6", "12BE6", "--supply-v", "230"], "far above"),
    (["string", "NOPE", "12BE6", "--supply-v", "25"], "neither a tube"),
    (["string", "12BA6", "--supply-v", "-5"], "too small"),
    (["softstart", "x.csv", "--recommend", "--series-ohm", "4"], "chooses the design"),
    (["softstart", "x.csv", "--gate-ohm", "1000"], "needs --gate-ohm, --gate-uf and --vth"),
    (["softstart", "x.csv", "--ntc", "10,3000,-1,30"], "positive"),
    (["softstart", "{csv}", "--type", "12AX7", "--supply-v", "120"], "far above"),
    (["softstart", "{csv}", "--series-ohm", "-5"], "too small"),
])
def test_circuit_commands_bad_input(tmp_path, capsys, argv, words):
    csv = tmp_path / "c.csv"
    write_curve(csv, heater(seed=3, t_end=12.0))
    argv = [a.replace("{csv}", str(csv)) for a in argv]
    try:
        rc = main([*argv, "--db", str(tmp_path / "none.db")])
    except SystemExit as e:
        rc = e.code
    err = capsys.readouterr().err
    assert rc in (1, 2) and words in " ".join(err.split()) and "Traceback" not in err
    assert not (tmp_path / "none.db").exists()


# against ngspice --------------------------------------------------------------
@pytest.mark.parametrize("circuit,count", [
    (Circuit(6.3, 0.05), 1),
    (Circuit(6.3, 0.05, 10.0, bypass_s=2.0), 1),
    (Circuit(6.3, 0.1, ramp_s=1.5), 2),
    (Circuit(12.6, 0.1, 8.0, series=True), 2),
], ids=["plain", "preheat-and-bypass", "ramp-two-in-parallel", "two-in-series"])
def test_the_simulation_agrees_with_ngspice(fitted, tmp_path, circuit, count):
    """ngspice (an independent integrator; the Debian package, .ci/run
    installs it) runs the same circuit with each heater written as a
    behavioural subcircuit (circuits/spice.py): currents, heater voltages and
    the flashing share's temperature agree within 1 %."""
    import subprocess

    from glowtrace.circuits.spice import deck, read_wrdata
    from spice import NGSPICE
    if NGSPICE is None:
        pytest.skip("ngspice is not installed (Debian package ngspice; .ci/run installs it)")
    _, h = fitted
    hs = [h] * count
    out = tmp_path / "out.txt"
    (tmp_path / "deck.cir").write_text(deck(circuit, hs, 30.0, str(out)))
    subprocess.run([NGSPICE, "-b", str(tmp_path / "deck.cir")], capture_output=True,
                   timeout=120)
    d = read_wrdata(str(out))
    ts, current = d[:, 0], -d[:, 1]
    run = simulate(circuit, hs, 30.0)
    times = [1e-4, 0.01, 0.1, 0.5, 1.0, 1.9, 2.1, 3.0, 10.0, 29.0]
    assert np.interp(times, run.t, run.current) == pytest.approx(
        np.interp(times, ts, current), rel=0.01)
    assert np.interp(times, run.t, run.heater_v[0]) == pytest.approx(
        np.interp(times, ts, d[:, 2]), rel=0.01)
    assert run.exposed_k[0].max() == pytest.approx(d[:, 2 + count].max(), rel=0.01)
    assert run.current.max() == pytest.approx(current.max(), rel=0.01)


@pytest.mark.parametrize("width", [60, 80, 120])
def test_circuit_screens_fit_the_terminal(tmp_path, capsys, monkeypatch, width):
    from test_screens import assert_whole, screen
    csv = tmp_path / "c.csv"
    write_curve(csv, heater(seed=3, f=0.04, t_end=15.0))
    rc, out, err = screen(capsys, monkeypatch, width, "softstart", str(csv), "--type", "12AX7",
                          "--ambient-c", "22", "--series-ohm", "10", "--bypass-s", "3",
                          "--db", str(tmp_path / "b.db"))
    assert rc == 0
    assert_whole(out, width, ["peak supply current", "1.0", "K"])
    rc, out, err = screen(capsys, monkeypatch, width, "string", "12BE6", "12BA6", "50C5",
                          "35W4", "--supply-v", "110", "--db", str(tmp_path / "b.db"))
    assert rc == 0
    assert_whole(out, width, ["12BE6", "50C5", "35W4", "Remedies"])
