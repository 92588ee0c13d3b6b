"""The tester's two variants (schematics/frontend.json, 30 V; frontend-55v.json,
55 V for series-string heaters) as the host and the simulated tester see
them, and the cautions shown where advice could hurt someone: a set whose
chassis may be tied to the mains, a hot tube or load after a test."""

import json

import pytest

from glowtrace import safety
from glowtrace.tester.sockets import variant_for, variant_limits


def test_the_variants_and_the_smallest_that_takes_a_heater():
    assert variant_limits() == {"30V": 30, "55V": 55}
    assert variant_for(6.3) == "30V" and variant_for(30) == "30V"
    assert variant_for(50) == "55V" and variant_for(56) is None


def test_socket_names_the_variant_and_never_a_voltage_the_board_refuses(cli):
    code, out, err = cli("--json", "socket", "50C5")
    r = json.loads(out)
    assert code == 0 and r["variant"] == "55V" and r["supply_v"] == 50
    assert "isolation transformer" in r["caution"]
    code, out, err = cli("socket", "50C5", "--variant", "30V")
    assert code != 0 and "55V variant" in err and "set the supply" not in out
    code, out, err = cli("socket", "50C5")
    assert "55V variant" in " ".join(out.split()) and "isolation transformer" in " ".join(
        err.split())
    code, out, err = cli("--json", "socket", "12AX7")
    assert json.loads(out)["variant"] == "30V" and json.loads(out)["caution"] is None


def test_capture_on_each_variant(cli, tmp_path):
    db = tmp_path / "v.db"
    code, _, err = cli("--db", db, "capture", "--port", "glowsim://?tube=50C5", "--tube",
                       "R-50", "--type", "50C5", "--section", "A")
    assert code != 0 and "above this tester's 30 V" in err and "55V variant" in err
    code, out, err = cli("--db", db, "capture", "--port", "glowsim://?tube=50C5&variant=55V",
                         "--tube", "R-50", "--type", "50C5", "--section", "A")
    assert code == 0, err
    flat = " ".join(err.split())
    assert "isolation transformer" in flat and "The tube is hot" in flat
    code, out, _ = cli("--json", "firmware", "version", "--port", "glowsim://?variant=55V")
    assert json.loads(out)["variant"] == "55V"


def test_the_string_study_carries_the_mains_caution(cli, tmp_path):
    code, out, _ = cli("--db", tmp_path / "s.db", "--json", "string", "12BA6", "12BE6",
                       "--supply-v", "25.2")
    assert code == 0 and "chassis tied to the mains" in json.loads(out)["caution"]


@pytest.mark.parametrize("watts, minutes", [(0.5, None), (2.0, 2), (7.5, 5), (25.0, 10)])
def test_hot_cautions_scale_with_the_power(watts, minutes):
    msg = safety.hot_after(watts)
    assert (msg is None) == (minutes is None)
    if msg:
        assert f"about {minutes} min" in msg


def test_calibration_and_selftest_say_the_load_is_hot(cli, tmp_path):
    port = f"glowsim://?serial=HOT1&state_dir={tmp_path}"
    code, _, err = cli("--db", tmp_path / "c.db", "calibrate", "--port", port, "--supply-v",
                       "6.3", "--yes")
    assert code == 0 and "reference resistor is hot" in " ".join(err.split())
    code, out, err = cli("selftest", "--port", "glowsim://", "--load-ohm", "4.7", "--yes")
    assert "dummy load is hot" in " ".join(err.split())


def test_calibration_refuses_a_supply_above_the_boards_variant(cli, tmp_path):
    port = f"glowsim://?serial=HOT2&state_dir={tmp_path}"
    code, _, err = cli("--db", tmp_path / "c.db", "calibrate", "--port", port, "--supply-v",
                       "50", "--yes")
    assert code != 0 and "above this tester's 30 V (30V variant)" in err
