"""Bad curves and bad files: a clear message or a warning, never a traceback."""


import numpy as np
import pytest

from glowtrace import catalogue
from glowtrace.analysis.analyze import analyze_capture, analyze_curve
from glowtrace.analysis.curve import Curve
from glowtrace.analysis.csvio import CurveFileError, read_curve, write_curve
from curves import constant, first_order
from simhelp import sim_tester



def test_open_heater_curve():
    c = constant()
    m = analyze_curve(Curve(c.t, c.v, c.i * 0 + 1e-5), 20.0)
    assert any("open heater" in w for w in m["warnings"])
    assert m["cold_resistance_ohm"] is None and m["cold_start_ok"] is False


def test_shorted_heater_curve():
    m = analyze_curve(constant(r=0.02, volts=0.1), 20.0)
    assert any("shorted" in w for w in m["warnings"])
    assert m["cold_start_ok"] is False


def test_clipped_peak_is_flagged():
    c = first_order()
    i = np.minimum(c.i, 0.8)  # the converter tops out at 0.8 A
    m = analyze_curve(Curve(c.t, c.v, i, clip_a=0.8), 20.0, fit_model=False)
    assert any("clipped" in w for w in m["warnings"])
    assert m["cold_resistance_ohm"] == pytest.approx(6.0, rel=0.05)  # from unclipped samples
    m = analyze_curve(Curve(c.t, c.v, i), 20.0, fit_model=False)  # flat top, no clip level
    assert any("clipped" in w for w in m["warnings"])


def test_curve_too_short():
    c = first_order()
    keep = c.t < 0.5
    m = analyze_curve(Curve(c.t[keep], c.v[keep], c.i[keep]), 20.0)
    assert any("too short" in w for w in m["warnings"])
    assert m["settle_1pct_s"] is None and m["flash_index"] is None


def test_too_few_samples_is_an_error():
    with pytest.raises(ValueError, match="fewer than 10 samples"):
        analyze_curve(Curve(np.arange(-3, 5) * 0.1, np.ones(8), np.ones(8)), 20.0)


def test_sagging_supply_is_flagged():
    c = first_order()
    v = c.v - 2.0 * c.i  # 2 ohm source resistance
    m = analyze_curve(Curve(c.t, v, c.i), 20.0, fit_model=False)
    assert any("sagged" in w for w in m["warnings"])


@pytest.mark.parametrize("fault,section", [("short", "A"), ("open", "B")])
def test_tripped_captures_analyse_without_error(fault, section):
    with sim_tester(fault=fault, fault_section=section) as t:
        raw = t.capture("T", section, {"range": "high"})
    a = analyze_capture(raw, catalogue.load().get("12AX7"))
    # the trip names the fault (analysis 2.0): an open heater, or a short on the
    # high range
    m = a["sections"][section]
    ws = " ".join(m["warnings"])
    assert m["heater_fault"] and (("open heater" in ws) if fault == "open" else ("shorted" in ws))


def test_warm_start_on_the_simulator():
    with sim_tester(preheat_k=700) as t:
        raw = t.capture("T", "A", {})
    a = analyze_capture(raw, catalogue.load().get("12AX7"))["sections"]["A"]
    assert a["cold_start_ok"] is False


# CSV files -------------------------------------------------------------------
def _csv(tmp_path, text, name="curve.csv"):
    p = tmp_path / name
    p.write_text(text)
    return p


def test_csv_round_trip(tmp_path):
    c = first_order(light_amp=2.0)
    p = tmp_path / "c.csv"
    write_curve(p, c, "exported by a test\nsecond line")
    back, warnings = read_curve(p)
    assert warnings == []
    assert np.allclose(back.t, c.t) and np.allclose(back.i, c.i, rtol=1e-8)
    assert np.allclose(back.light, c.light)


def test_csv_bad_rows_are_skipped_with_a_warning(tmp_path):
    c = first_order()
    p = tmp_path / "c.csv"
    write_curve(p, c)
    lines = p.read_text().splitlines()
    lines[40] = "0.001,abc,0.5"
    lines[41] = "1,2"
    p.write_text("\n".join(lines))
    back, warnings = read_curve(p)
    assert len(back.t) == len(c.t) - 2
    assert "skipped 2 unreadable row(s), first at line 41" in warnings[0]


@pytest.mark.parametrize("text,msg", [
    ("", "no header"),
    ("# only a comment\n", "no header"),
    ("t,volts,amps\n" + "0,1,1\n" * 20, "missing: time_s"),
    ("time_s,volts,amps\n0,1,1\n", "only 1 readable"),
    ("time_s,volts,amps\n" + "".join(f"{k * 0.1},x,y\n" for k in range(30)), "only 0 readable"),
    ("time_s,volts,amps\n" + "".join(f"{k * 0.1},1,1\n" for k in range(30))
     + "".join(f"{k},bad,1\n" for k in range(5)), "unreadable"),
    ("time_s,volts,amps\n" + "".join(f"{1 - k * 0.1},1,1\n" for k in range(30)), "must increase"),
    ("time_s,volts,amps\n" + "".join(f"{-5 + k * 0.1},1,1\n" for k in range(30)),
     "no samples at or after switch-on"),
])
def test_csv_errors(tmp_path, text, msg):
    with pytest.raises(CurveFileError, match=msg):
        read_curve(_csv(tmp_path, text))


def test_cli_analyze_bad_files_exit_cleanly(tmp_path, cli):
    cases = [tmp_path / "missing.csv",
             _csv(tmp_path, "a,b\n1,2\n", "cols.csv"),
             _csv(tmp_path, "\x00\x01binary", "bin.csv")]
    for p in cases:
        rc, _, err = cli("analyze", p)
        assert rc == 1, err
        assert "glowtrace: error:" in err and "Traceback" not in err
    good = tmp_path / "good.csv"
    write_curve(good, first_order())
    for args in (["--type", "12AX9"], ["--rated-volts", "6.3"],
                 ["--type", "12AX7", "--rated-volts", "6.3", "--rated-amps", "0.3"],
                 ["--ambient-c", "400"]):
        rc, _, err = cli("analyze", good, *args)
        assert rc in (1, 2) and "Traceback" not in err, (args, err)
