"""The tester circuit (schematics/frontend.lib, tester.cir) simulated with
ngspice against the front-end numbers in schematics/frontend.json and the
ratings in schematics/parts.csv."""

import csv
import json

import pytest

from spice import SCHEMATICS, needs_ngspice, run

FE = json.loads((SCHEMATICS / "frontend.json").read_text())
VARIANTS = {"30V": FE, "55V": json.loads((SCHEMATICS / "frontend-55v.json").read_text())}
ROWS = list(csv.DictReader((SCHEMATICS / "parts.csv").open()))
VREF = FE["adc"]["vref_v"]
pytestmark = needs_ngspice


def parts(variant: str) -> dict:
    """The parts of a variant: the shared rows and its own."""
    return {r["reference"]: r for r in ROWS if r["variant"] in ("all", variant)}


PARTS = parts("30V")


def voltage_ch(fe: dict) -> str:
    """The VOLTAGE_CH instance parameters of a variant's divider and filter."""
    d = fe["voltage_divider"]
    return f"rtop={d['r_top_ohm']} rbot={d['r_bottom_ohm']} cf={fe['voltage_divider_filter_pf']}p"


@pytest.mark.parametrize("rng,gpio", [("low", 0.0), ("high", 3.3)])
def test_current_channel_transfer(tmp_path, rng, gpio):
    apv = FE["current_ranges"][rng]["amps_per_volt"]
    i1, i2 = 0.1 * VREF * apv, 0.8 * VREF * apv
    vals = run(f"""* current channel transfer
.include @LIB@
Iload 0 sp DC 0
Rsh sp 0 {FE['current_ranges'][rng]['shunt_ohm']}
Vdd vdd3 0 DC 3.3
Vrng rng 0 DC {gpio}
X1 sp 0 rng adc vdd3 CURRENT_CH
.dc Iload 0 {i2 * 1.1} {i2 / 200}
.control
run
meas dc v1 FIND v(adc) AT={i1}
meas dc v2 FIND v(adc) AT={i2}
quit
.endc
.end
""", tmp_path)
    slope = (i2 - i1) / (vals["v2"] - vals["v1"])  # amps per volt at the converter
    assert slope == pytest.approx(apv, rel=0.005)
    assert vals["v1"] * apv == pytest.approx(i1, rel=0.005)  # no offset


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_voltage_channel_transfer(tmp_path, variant):
    fe = VARIANTS[variant]
    top = fe["limits"]["supply_v_max"]
    lo, hi = 0.1 * top, 0.9 * top
    vals = run(f"""* voltage channel transfer
.include @LIB@
Vn node 0 DC 0
Vdd vdd3 0 DC 3.3
X1 node adc vdd3 VOLTAGE_CH {voltage_ch(fe)}
.dc Vn 0 {top} 0.5
.control
run
meas dc v1 FIND v(adc) AT={lo}
meas dc v2 FIND v(adc) AT={hi}
quit
.endc
.end
""", tmp_path)
    vpv = (hi - lo) / (vals["v2"] - vals["v1"])
    assert vpv == pytest.approx(fe["voltage_divider"]["volts_per_volt"], rel=0.002)
    assert top / vpv < VREF  # full supply range fits


def _corner(tmp_path, subckt_lines: str) -> float:
    vals = run(f"""* anti-alias corner
.include @LIB@
Vdd vdd3 0 DC 3.3
Vrng rng 0 DC 0
{subckt_lines}
.ac dec 200 100 2meg
.control
run
let mag = abs(v(adc))
meas ac g0 FIND mag AT=200
let rel = mag / g0
meas ac fc WHEN rel=0.7071 FALL=1
quit
.endc
.end
""", tmp_path)
    return vals["fc"]


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_filter_corners_match_the_data_file_and_the_schedule(tmp_path, variant):
    from glowfw_schedule import dense_interval_us
    fe = VARIANTS[variant]
    fc_i = _corner(tmp_path, "Vac sp 0 DC 0.01 AC 0.001\nX1 sp 0 rng adc vdd3 CURRENT_CH")
    fc_v = _corner(tmp_path, "Vac node 0 DC 6 AC 1\nX1 node adc vdd3 VOLTAGE_CH "
                   + voltage_ch(fe))
    want = FE["anti_alias"]["corner_hz"]
    for fc in (fc_i, fc_v):
        assert fc == pytest.approx(want, rel=0.1)
        # each channel is converted once per set in the dense phase: the
        # corner must sit below that rate's Nyquist frequency, and not so far
        # below that the first milliseconds are smoothed away
        nyquist = 0.5e6 / dense_interval_us(len([c for c in FE["channels"]
                                                 if not c.get("optional")]))
        assert 0.5 * nyquist < fc <= nyquist
    assert fc_i == pytest.approx(fc_v, rel=0.05)  # V and I stay in step


def _switch_deck(r_heater: float) -> str:
    return f"""* switch at the largest inrush
.include @LIB@
Vs sup 0 DC 6.3
Rh sup d {r_heater}
X1 d s gpio SWITCH
Rsh s 0 {FE['current_ranges']['high']['shunt_ohm']}
Vg gpio 0 PULSE(0 3.3 10u 10n 10n 1m 2m)
.tran 5n 200u
.control
run
let id = v(s) / {FE['current_ranges']['high']['shunt_ohm']}
let p = (v(d) - v(s)) * id
meas tran idmax FIND id AT=150u
meas tran t10 WHEN id={0.1 * 6.3 / r_heater} RISE=1
meas tran t90 WHEN id={0.9 * 6.3 / r_heater} RISE=1
let vds = v(d) - v(s)
meas tran vds FIND vds AT=150u
meas tran eon INTEG p from=10u to=30u
meas tran pmax MAX p
quit
.endc
.end
"""


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_switch_turns_on_fast_and_stays_cool_at_the_largest_inrush(tmp_path, variant):
    fe, p = VARIANTS[variant], parts(variant)
    i_max = fe["limits"]["max_inrush_a"]
    vals = run(_switch_deck(6.3 / i_max), tmp_path)
    t_on_us = (vals["t90"] - vals["t10"]) * 1e6
    assert t_on_us < fe["switch"]["turn_on_max_us"]
    rds = vals["vds"] / vals["idmax"]
    assert rds == pytest.approx(fe["switch"]["rds_on_ohm"], rel=0.35)
    # conduction at the peak, held for a whole inrush (pessimistic), against
    # the part's rating with its derating; switching adds a few millijoules
    conduction = vals["idmax"] ** 2 * fe["switch"]["rds_on_ohm"]
    q = p["Q1"]
    assert conduction <= float(q["pulse_w"]) * float(q["derating"])
    assert vals["eon"] < 5e-3
    # the shunt at the same current
    rs = p["RS1"]
    assert i_max ** 2 * fe["current_ranges"]["high"]["shunt_ohm"] <= (
        float(rs["pulse_w"]) * float(rs["derating"]))
    assert fe["limits"]["max_hot_a"] ** 2 * fe["current_ranges"]["high"]["shunt_ohm"] <= (
        float(rs["power_w"]) * float(rs["derating"]))


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_divider_power_at_the_highest_supply(variant):
    fe, p = VARIANTS[variant], parts(variant)
    vmax = fe["protection"]["tvs_clamp_max_v"]  # a transient the TVS clamps, held (pessimistic)
    top, bot = (fe["voltage_divider"][k] for k in ("r_top_ohm", "r_bottom_ohm"))
    i = vmax / (top + bot)
    assert i * i * top <= float(p["R9"]["power_w"]) * float(p["R9"]["derating"])
    assert i * i * bot <= float(p["R10"]["power_w"]) * float(p["R10"]["derating"])
    assert f"{top / 1000:g} kohm" in p["R9"]["value"] and f"{bot / 1000:g} kohm" in p["R10"]["value"]


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_converter_inputs_stay_within_rating_at_overload(tmp_path, variant):
    """Twice the largest inrush on the low range, and the supply rail at the
    TVS's largest clamping voltage: the converter's pins and the amplifier's
    inputs stay inside their ratings, and the clamp diodes' current inside
    theirs."""
    fe = VARIANTS[variant]
    limit = fe["adc"]["input_max_v"]
    clamp = fe["protection"]["tvs_clamp_max_v"]
    vals = run(f"""* overload
.include @LIB@
Vdd vdd3 0 DC 3.3
Vrng rng 0 DC 0
Iload 0 sp PULSE(0 {2 * fe['limits']['max_inrush_a']} 10u 1u 1u 1m 2m)
Rsh sp 0 {fe['current_ranges']['low']['shunt_ohm']}
X1 sp 0 rng adci vdd3 CURRENT_CH
Vn node 0 PULSE(0 {clamp} 10u 1u 1u 1m 2m)
X2 node adcv vdd3 VOLTAGE_CH {voltage_ch(fe)}
.tran 50n 500u
.control
run
meas tran vi MAX v(adci)
meas tran vv MAX v(adcv)
meas tran vimin MIN v(adci)
meas tran vsp MAX v(sp)
let itop = (v(node) - v(adcv)) / {fe['voltage_divider']['r_top_ohm']}
meas tran iclamp MAX itop
quit
.endc
.end
""", tmp_path)
    assert vals["vi"] <= limit and vals["vv"] <= limit
    assert vals["vimin"] >= -0.3
    assert vals["iclamp"] < 0.2 * 0.5  # D4: 200 mA, derated by half
    # the amplifier's inputs sit on the low-side shunt: far inside its
    # common-mode limit even at twice the largest inrush
    assert vals["vsp"] < fe["protection"]["amplifier_input_max_v"]


@pytest.mark.parametrize("variant", list(VARIANTS))
def test_protection_ratings_chain(variant):
    """The TVS stands off the whole supply range; what it lets through at
    full pulse current stays below the switches', the capacitor's and the
    fuse's ratings (the numbers of the variant's example parts)."""
    fe, p = VARIANTS[variant], parts(variant)
    pr = fe["protection"]
    assert pr["tvs_standoff_v"] >= fe["limits"]["supply_v_max"]
    assert pr["tvs_clamp_max_v"] < pr["switch_vds_v"]
    assert pr["tvs_clamp_max_v"] < pr["bulk_capacitor_v"]
    assert pr["fuse_v_dc"] >= fe["limits"]["supply_v_max"]
    # the parts list says the same
    assert f"{pr['switch_vds_v']:g} V" in p["Q1"]["rating"]
    assert f"{pr['bulk_capacitor_v']:g} V" in p["C1"]["rating"]
    assert f"{pr['tvs_standoff_v']:g} V" in p["D1"]["value"]
    assert f"{pr['fuse_v_dc']:g} V DC" in p["F1"]["rating"]
    # below the usual 60 V DC limit of safety extra-low voltage (common practice)
    assert fe["limits"]["supply_v_max"] < 60


def test_whole_tester_deck_runs(tmp_path):
    deck = (SCHEMATICS / "tester.cir").read_text().replace(".include frontend.lib",
                                                          ".include @LIB@")
    vals = run(deck, tmp_path)
    # a cold 6.2 ohm section on 6.3 V reads about 1 A through the low range
    assert vals["adc0_max"] * FE["current_ranges"]["low"]["amps_per_volt"] == pytest.approx(
        6.3 / 6.2, rel=0.03)
    assert vals["adc2_on"] * FE["voltage_divider"]["volts_per_volt"] == pytest.approx(6.24, abs=0.05)
