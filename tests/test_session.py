"""The bench session (procedures/session.py, `glowtrace session`) on the
simulated tester: labels numbered on, the box under its lot, the brief cold
reading that refuses a warm, open or shorted tube before switch-on, the
prompts' choices, and every finished tube kept when the session is stopped."""

import json

import pytest

from glowtrace.logbook.store import Store
from glowtrace.procedures import session as ses


def _run(cli, db, url, *extra):
    code, out, err = cli("--db", db, "--json", "session", "--port", url, "--type", "12AX7",
                         "--yes", *extra)
    assert code == 0, err
    return json.loads(out)


def test_a_box_is_captured_under_its_lot_with_numbered_labels(cli, tmp_path):
    db = tmp_path / "s.db"
    rows = _run(cli, db, "glowsim://?tube=12AX7&seed=2", "--labels", "B7-###", "--start", "9",
                "--lot", "Box 7", "--count", "2")
    assert [r["tube"] for r in rows] == ["B7-009", "B7-010"]
    assert all(r["outcome"] == "captured" and r["grade"] for r in rows)
    assert "IA" in rows[0]["figures"] and rows[0]["figures"]["IA"].endswith(" A")
    with Store(db) as s:
        tubes = {r["label"]: r["owner"] for r in s.db["tubes"].rows}
        assert tubes == {"B7-009": "Box 7", "B7-010": "Box 7"}
        assert s.db["captures"].count == 2
    # the lot is found again whatever the case
    code, out, _ = cli("--db", db, "--json", "owner", "show", "box 7")
    assert code == 0 and len(json.loads(out)["tubes"]) == 2


@pytest.mark.parametrize("setting, kind", [("preheat_k=150", "warm"), ("fault=open", "open"),
                                           ("fault=short", "short")])
def test_a_warm_open_or_shorted_tube_is_refused_before_its_capture(cli, tmp_path, setting, kind):
    db = tmp_path / "s.db"
    rows = _run(cli, db, f"glowsim://?tube=12AX7&{setting}", "--count", "1")
    assert rows[0]["outcome"] == "refused" and rows[0]["note"].startswith(kind), rows
    if kind == "warm":
        assert "cool about" in rows[0]["note"]
    with Store(db) as s:
        assert s.db["captures"].count == 0  # no "not a cold start" curve stored


def test_the_cold_check_against_closed_form_figures():
    """judge_cold on readings made up by hand: 12AX7 section, 6.3 V / 0.15 A
    rated (42 ohm hot), so about 6.5 ohm cold from the catalogue."""
    from glowtrace import catalogue
    kind = catalogue.load().get("12AX7")
    exp, src = 6.46, "catalogue"

    def reading(ohm, amps=1.0, tripped=False):
        return {"tripped": tripped, "volts": ohm * amps, "amps": {"A": amps}, "ohm": {"A": ohm}}
    ses.judge_cold(reading(6.6), kind, exp, src, 22.0, 3.3)  # cold: passes
    with pytest.raises(ses.Refused) as e:
        ses.judge_cold(reading(6.46 * 1.6), kind, exp, src, 22.0, 3.3)
    assert e.value.kind == "warm" and e.value.wait_s > 0
    with pytest.raises(ses.Refused) as e:
        ses.judge_cold(reading(1.0), kind, exp, src, 22.0, 3.3)
    assert e.value.kind == "short"
    with pytest.raises(ses.Refused) as e:
        ses.judge_cold(reading(1e3, amps=0.006), kind, exp, src, 22.0, 3.3)
    assert e.value.kind == "open"
    # the margin is tighter once the tube's own cold figure is known
    with pytest.raises(ses.Refused):
        ses.judge_cold(reading(6.46 * 1.1), kind, exp, "own", 22.0, 3.3)


def test_prompts_skip_change_type_and_stop_keep_what_was_done(tmp_path):
    """Scripted answers: capture, skip, change the type (then refuse a bad
    one), stop with Ctrl-C: the captured tube is in the logbook."""
    db = tmp_path / "s.db"
    answers = iter(["", "s", "t NOSUCH", "t 12AU7", "", KeyboardInterrupt])
    said = []

    def ask(prompt):
        a = next(answers)
        if a is KeyboardInterrupt:
            raise KeyboardInterrupt
        return a
    s = ses.Session(db, ["glowsim://?tube=12AX7"], "12AX7", pattern=ses.LabelPattern("K-##"))
    results = ses.run(s, ask, said.append)
    assert [(r.label, r.outcome) for r in results] == [("K-01", "captured"), ("K-02", "skipped"),
                                                       ("K-03", "captured")]
    assert any("type now 12AU7" in line for line in said)
    assert any("NOSUCH" in line for line in said)
    with Store(db) as st:
        types = {r["label"]: r["type"] for r in st.db["tubes"].rows}
    assert types == {"K-01": "12AX7", "K-03": "12AU7"}


def test_bad_patterns_are_refused(cli, tmp_path):
    code, _, err = cli("--db", tmp_path / "s.db", "session", "--port", "glowsim://",
                       "--type", "12AX7", "--labels", "B7-", "--yes")
    assert code != 0 and "needs one run of #" in err
    with pytest.raises(ses.PatternError):
        ses.LabelPattern("A-##-##")


def test_several_testers_side_by_side_share_the_box_and_one_logbook(cli, tmp_path):
    """Three simulated testers, six tubes: each label once, every capture in
    the logbook (written by one writer), every tester used."""
    db = tmp_path / "s.db"
    ports = [f"glowsim://?tube=12BA6&serial=T{n}" for n in (1, 2, 3)]
    code, out, err = cli("--db", db, "--json", "session", *[a for p in ports for a in
                                                              ("--port", p)],
                         "--type", "12BA6", "--labels", "M-###", "--count", "6", "--yes")
    assert code == 0, err
    rows = json.loads(out)
    assert [r["tube"] for r in rows] == [f"M-{n:03d}" for n in range(1, 7)]
    assert all(r["outcome"] == "captured" for r in rows)
    assert "locked" not in err
    with Store(db) as s:
        caps = list(s.db.execute("SELECT tube, hello_hash FROM captures"))
        assert sorted(t for t, _ in caps) == [f"M-{n:03d}" for n in range(1, 7)]
        boards = {r[0] for r in s.db.execute(
            "SELECT json_extract(hello, '$.board') FROM tester_records")}
    assert boards == {"sim-T1", "sim-T2", "sim-T3"}


def test_a_failing_tester_does_not_stop_the_others(tmp_path):
    db = tmp_path / "s.db"
    said = []
    s = ses.Session(db, ["glowsim://?tube=12BA6&serial=G1",
                         "glowsim://?tube=12BA6&serial=G2&fault=open"], "12BA6",
                    pattern=ses.LabelPattern("G-#"), count=4)
    results = ses.run(s, lambda p: "s" if "Retest " in p else "", said.append)
    outcomes = sorted((r.label, r.outcome) for r in results)
    assert len(outcomes) == 4 and {o for _, o in outcomes} <= {"captured", "refused"}
    assert all(line.startswith(("[1] ", "[2] ")) for line in said)
    # the open tester refuses every tube it is given; the good one captures
    # every one it is given, and the box is shared out between them
    by = {r.label: next(line[:3] for line in said if line[4:].startswith(r.label + ":"))
          for r in results}
    assert {by[r.label] for r in results if r.outcome == "refused"} == {"[2]"}
    assert {by[r.label] for r in results if r.outcome == "captured"} == {"[1]"}


def test_the_last_tube_can_be_retested_without_losing_a_label(tmp_path):
    """r after a result captures the last tube again, then the next label's
    prompt comes back: the box's numbering goes on where it was."""
    db = tmp_path / "s.db"
    answers = iter(["", "r", "", "", "q"])
    prompts = []

    def ask(prompt):
        prompts.append(prompt)
        return next(answers)
    s = ses.Session(db, ["glowsim://?tube=12BA6"], "12BA6", pattern=ses.LabelPattern("R-#"))
    results = ses.run(s, ask, lambda _: None)
    assert [(r.label, r.outcome) for r in results] == [("R-1", "captured"),
                                                       ("R-1", "captured"),
                                                       ("R-2", "captured")]
    assert "r retest R-1" in prompts[1] and "Put R-1 back in" in prompts[2]
    with Store(db) as st:
        caps = sorted(r[0] for r in st.db.execute("SELECT tube FROM captures"))
    assert caps == ["R-1", "R-1", "R-2"]


def test_all_testers_found_on_usb_run_side_by_side(monkeypatch, cli, tmp_path):
    """--all-testers takes every board that answers on USB (here two
    simulated testers stand in for the scan's result)."""
    from glowtrace.tester import ports
    found = ["glowsim://?tube=12BA6&serial=U1", "glowsim://?tube=12BA6&serial=U2"]
    monkeypatch.setattr(ports, "scan", lambda probe_boards=True: [
        {"device": d, "glowtrace": True} for d in found])
    db = tmp_path / "s.db"
    code, out, err = cli("--db", db, "--json", "session", "--all-testers", "--type", "12BA6",
                         "--labels", "U-#", "--count", "4", "--yes")
    assert code == 0, err
    assert [r["outcome"] for r in json.loads(out)] == ["captured"] * 4
    with Store(db) as s:
        boards = {r[0] for r in s.db.execute(
            "SELECT json_extract(hello, '$.board') FROM tester_records")}
    assert boards == {"sim-U1", "sim-U2"}
    monkeypatch.setattr(ports, "scan", lambda probe_boards=True: [])
    code, _, err = cli("--db", db, "session", "--all-testers", "--type", "12BA6", "--yes")
    assert code != 0 and "no glowtrace tester found" in err
