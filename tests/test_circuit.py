"""The tester circuit (schematics/frontend.lib, tester.cir) simulated with
ngspice against the front-end numbers in schematics/frontend.json and the
ratings in schematics/parts.csv."""

import csv
import json

import pytest

from spice import SCHEMATICS, needs_ngspice, run

FE = json.loads((SCHEMATICS / "frontend.json").read_text())
PARTS = {r["reference"]: r for r in csv.DictReader((SCHEMATICS / "parts.csv").open())}
VREF = FE["adc"]["vref_v"]
pytestmark = needs_ngspice


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


def test_voltage_channel_transfer(tmp_path):
    vals = run("""* voltage channel transfer
.include @LIB@
Vn node 0 DC 0
Vdd vdd3 0 DC 3.3
X1 node adc vdd3 VOLTAGE_CH
.dc Vn 0 30 0.5
.control
run
meas dc v1 FIND v(adc) AT=3
meas dc v2 FIND v(adc) AT=27
quit
.endc
.end
""", tmp_path)
    vpv = (27 - 3) / (vals["v2"] - vals["v1"])
    assert vpv == pytest.approx(FE["voltage_divider"]["volts_per_volt"], rel=0.002)
    assert FE["limits"]["supply_v_max"] / vpv < VREF  # full supply range fits


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


def test_filter_corners_match_the_data_file_and_the_schedule(tmp_path):
    from glowfw_schedule import dense_interval_us
    fc_i = _corner(tmp_path, "Vac sp 0 DC 0.01 AC 0.001\nX1 sp 0 rng adc vdd3 CURRENT_CH")
    fc_v = _corner(tmp_path, "Vac node 0 DC 6 AC 1\nX1 node adc vdd3 VOLTAGE_CH")
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


def test_switch_turns_on_fast_and_stays_cool_at_the_largest_inrush(tmp_path):
    i_max = FE["limits"]["max_inrush_a"]
    vals = run(_switch_deck(6.3 / i_max), tmp_path)
    t_on_us = (vals["t90"] - vals["t10"]) * 1e6
    assert t_on_us < FE["switch"]["turn_on_max_us"]
    rds = vals["vds"] / vals["idmax"]
    assert rds == pytest.approx(FE["switch"]["rds_on_ohm"], rel=0.35)
    # conduction at the peak, held for a whole inrush (pessimistic), against
    # the part's rating with its derating; switching adds a few millijoules
    conduction = vals["idmax"] ** 2 * rds
    q = PARTS["Q1"]
    assert conduction <= float(q["pulse_w"]) * float(q["derating"])
    assert vals["eon"] < 5e-3
    # the shunt at the same current
    rs = PARTS["RS1"]
    assert i_max ** 2 * FE["current_ranges"]["high"]["shunt_ohm"] <= (
        float(rs["pulse_w"]) * float(rs["derating"]))
    assert FE["limits"]["max_hot_a"] ** 2 * FE["current_ranges"]["high"]["shunt_ohm"] <= (
        float(rs["power_w"]) * float(rs["derating"]))


def test_divider_power_at_the_highest_supply():
    vmax = FE["limits"]["supply_v_max"]
    top, bot = (FE["voltage_divider"][k] for k in ("r_top_ohm", "r_bottom_ohm"))
    i = vmax / (top + bot)
    assert i * i * top <= float(PARTS["R9"]["power_w"]) * float(PARTS["R9"]["derating"])
    assert i * i * bot <= float(PARTS["R10"]["power_w"]) * float(PARTS["R10"]["derating"])


def test_converter_inputs_stay_within_rating_at_overload(tmp_path):
    limit = FE["adc"]["input_max_v"]
    vals = run(f"""* overload: twice the largest inrush on the low range, 40 V supply
.include @LIB@
Vdd vdd3 0 DC 3.3
Vrng rng 0 DC 0
Iload 0 sp PULSE(0 {2 * FE['limits']['max_inrush_a']} 10u 1u 1u 1m 2m)
Rsh sp 0 {FE['current_ranges']['low']['shunt_ohm']}
X1 sp 0 rng adci vdd3 CURRENT_CH
Vn node 0 PULSE(0 40 10u 1u 1u 1m 2m)
X2 node adcv vdd3 VOLTAGE_CH
.tran 50n 500u
.control
run
meas tran vi MAX v(adci)
meas tran vv MAX v(adcv)
meas tran vimin MIN v(adci)
quit
.endc
.end
""", tmp_path)
    assert vals["vi"] <= limit and vals["vv"] <= limit
    assert vals["vimin"] >= -0.3


def test_whole_tester_deck_runs(tmp_path):
    deck = (SCHEMATICS / "tester.cir").read_text().replace(".include frontend.lib",
                                                          ".include @LIB@")
    vals = run(deck, tmp_path)
    # a cold 6.2 ohm section on 6.3 V reads about 1 A through the low range
    assert vals["adc0_max"] * FE["current_ranges"]["low"]["amps_per_volt"] == pytest.approx(
        6.3 / 6.2, rel=0.03)
    assert vals["adc2_on"] * FE["voltage_divider"]["volts_per_volt"] == pytest.approx(6.24, abs=0.05)
