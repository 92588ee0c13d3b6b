"""The `glowtrace` command as a user runs it."""

import json
import subprocess
import sys
from pathlib import Path

from glowtrace.cli import main
from simhelp import sim_url

GLOWTRACE = str(Path(sys.executable).parent / "glowtrace")


def run(*args, timeout=120):
    return subprocess.run([GLOWTRACE, *args], capture_output=True, text=True,
                          timeout=timeout)


def test_demo_end_to_end(demo_run):
    db, out = demo_run
    caps = out["captures"]
    assert len(caps) == 6 and all(c["complete"] for c in caps)
    assert {c["type"] for c in caps} >= {"12AX7", "6V6", "5U4GB"}
    assert {c["section"] for c in caps} == {"A", "B", "AB"}
    # both sections of the dual heater were switched on together in the first
    both = caps[0]
    assert both["peak_a_A"] > 4 * both["final_a_A"] and both["peak_a_B"] > 4 * both["final_a_B"]
    # the earlier visits are in the logbook too, and it judges them
    r = run("list", "--db", str(db), "--json")
    rows = json.loads(r.stdout)
    assert {c["uuid"] for c in caps} <= {x["uuid"] for x in rows} and len(rows) == 14
    judged = {t["tube"]: t for t in out["tubes"]}
    assert judged["QW-0117-V1"]["status"] == "steady"
    assert judged["QW-0117-V2"]["status"] in ("at limit", "drifting")
    assert "flash index" in judged["QW-0117-V2"]["reasons"][0]
    assert judged["QW-0117-V2"]["owner"] == "Ysolde Marrin"


def test_capture_list_show_through_the_cli(tmp_path, capsys):
    db = str(tmp_path / "shop.db")
    rc = main(["capture", "--port", sim_url(tube="12AU7"), "--tube", "KS-9", "--section", "B",
               "--type", "12AU7", "--max-s", "8", "--db", db, "--json"])
    cap = json.loads(capsys.readouterr().out)
    assert rc == 0 and cap["complete"] and cap["section"] == "B"
    assert 0.12 < cap["final_a_B"] < 0.18  # 12AU7 section: 0.15 A rated (from memory)
    main(["list", "--db", db, "--json"])
    rows = json.loads(capsys.readouterr().out)
    assert rows[0]["tube"] == "KS-9" and rows[0]["type"] == "12AU7"
    assert main(["show", cap["uuid"][:6], "--db", db, "--json"]) == 0
    shown = json.loads(capsys.readouterr().out)
    assert shown["uuid"] == cap["uuid"] and shown["calibration"]["source"] == "nominal"


def test_incomplete_capture_exits_nonzero_but_is_kept(tmp_path, capsys):
    db = str(tmp_path / "shop.db")
    rc = main(["capture", "--port", sim_url(reset_at_s=0.5), "--tube", "KS-1",
               "--section", "A", "--db", db, "--json"])
    out = json.loads(capsys.readouterr().out)
    assert rc == 2 and not out["complete"] and "reset" in out["incomplete_reason"]
    main(["list", "--db", db, "--json"])
    assert json.loads(capsys.readouterr().out)[0]["complete"] == 0


def test_bad_input_gets_a_message_not_a_traceback(tmp_path, cli):
    cases = [
        ("show", "nonexistent", "--db", str(tmp_path / "none.db")),
        ("capture", "--port", "glowsim://?tube=NOPE", "--tube", "x", "--section", "A",
         "--db", str(tmp_path / "a.db")),
        ("capture", "--port", "glowsim://?colour=blue", "--tube", "x", "--section", "A",
         "--db", str(tmp_path / "a.db")),
        ("capture", "--port", "/dev/does-not-exist", "--tube", "x", "--section", "A",
         "--db", str(tmp_path / "a.db")),
    ]
    for args in cases:
        rc, _, err = cli(*args)
        assert rc == 1, (args, err)
        assert "glowtrace: error:" in err and "Traceback" not in err, err
    rc, _, err = cli("capture", "--tube", "x", "--section", "C")
    assert rc == 2 and "invalid choice" in err


def test_ports_lists_without_error():
    r = run("ports", "--json")
    assert r.returncode == 0, r.stderr
    assert isinstance(json.loads(r.stdout), list)


def test_sim_command_serves_a_port_other_commands_use(tmp_path):
    p = subprocess.Popen([GLOWTRACE, "sim", "--tube", "6V6", "--json"],
                         stdout=subprocess.PIPE, text=True)
    try:
        text = ""
        while True:  # the JSON object spans lines; read until it parses
            text += p.stdout.readline()
            try:
                info = json.loads(text)
                break
            except json.JSONDecodeError:
                continue
        r = run("capture", "--port", info["port"], "--tube", "T", "--section", "A",
                "--max-s", "40", "--db", str(tmp_path / "x.db"), "--json")
        assert r.returncode == 0, r.stderr
        assert 0.40 < json.loads(r.stdout)["final_a_A"] < 0.50  # 6V6: 0.45 A (from memory)
    finally:
        p.terminate()
        p.wait(5)
