"""Faults judged as faults: the section that trips is a heater fault, a
section cut short with it is not judged (never called shorted), a faulty tube
gets the no-grade, the exit status tells scripts, and the current range comes
from the type unless given."""

import json


from glowtrace import catalogue, config, paths
from glowtrace.cli import main
from glowtrace.tester.sockets import range_for


def gt(capsys, *args):
    rc = main(list(args))
    out, err = capsys.readouterr()
    return rc, out, err


def history(capsys, db, label):
    rc, out, _ = gt(capsys, "history", label, "--db", db, "--json")
    assert rc == 0
    return json.loads(out)


def test_open_section_of_a_dual_heater(tmp_path, capsys):
    db = str(tmp_path / "f.db")
    rc, out, err = gt(capsys, "capture", "--port", "glowsim://?tube=12AT7&fault=open&"
                      "fault_section=A", "--tube", "F1", "--type", "12AT7", "--section", "AB",
                      "--db", db, "--json")
    assert rc == 3  # the tester switched off for the heater: scripts can tell
    cap = json.loads(out)
    assert cap["trip"] == "open_heater"
    h = history(capsys, db, "F1")
    assert h["status"] == "heater fault"
    assert h["grade"] == config.load()["grade_none"]["name"]
    by_sec = {c["section"]: c for c in h["captures"]}
    assert by_sec["A"]["excluded"].startswith("heater fault: open heater")
    b = by_sec["B"]
    assert b["excluded"].startswith("not judged") and "section A tripped" in b["excluded"]
    assert b.get("warnings") == [] and b.get("hot_current_a") is None
    assert "shorted" not in json.dumps(h)  # the good section is never called shorted


def test_the_range_comes_from_the_type():
    fe = json.loads(paths.FRONTEND_PATH.read_text())  # the reference tester's ranges
    cat = catalogue.load()
    assert range_for(cat.get("12AX7"), fe) == "low"
    assert range_for(cat.get("EL34"), fe) == "high"
    assert range_for(cat.get("5U4GB"), fe) == "high"
    # the rule: rated section current x 7.2 (published inrush up to 7.2 x,
    # audioXpress 2004) against 95 % of the low range's 3.3 A
    for name in cat.names():
        t = cat.get(name)
        expect = "high" if t.section_rating().amps * 7.2 > 0.95 * 3.3 else "low"
        assert range_for(t, fe) == expect


def test_a_power_tube_needs_no_range_option_and_a_forced_low_range_is_not_a_fault(
        tmp_path, capsys):
    db = str(tmp_path / "f.db")
    rc, out, err = gt(capsys, "capture", "--port", "glowsim://?tube=EL34", "--tube", "P1",
                      "--type", "EL34", "--section", "A", "--max-s", "12", "--db", db)
    assert rc in (0, 2) and "current range: high" in err
    rc, out, err = gt(capsys, "capture", "--port", "glowsim://?tube=EL34", "--tube", "P2",
                      "--type", "EL34", "--section", "A", "--range", "low", "--db", db)
    assert rc == 3 and "--range high" in " ".join(err.split())
    h = history(capsys, db, "P2")
    assert h["status"] != "heater fault" and h["grade"] is None
    assert h["captures"][0]["excluded"].startswith("not judged: the low current range tripped")


def test_a_short_on_the_high_range_is_a_heater_fault(tmp_path, capsys):
    db = str(tmp_path / "f.db")
    rc, out, err = gt(capsys, "capture", "--port", "glowsim://?tube=6V6&fault=short",
                      "--tube", "S1", "--type", "6V6", "--section", "A", "--range", "high",
                      "--db", db, "--json")
    assert rc == 3 and json.loads(out)["trip"] == "over_current"
    h = history(capsys, db, "S1")
    assert h["status"] == "heater fault" and "shorted" in h["reasons"][0]
    assert h["grade"] == config.load()["grade_none"]["name"]
