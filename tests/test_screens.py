"""The command line's screens as people and scripts meet them: narrow and wide
terminals, pipes, NO_COLOR and TERM=dumb, global options anywhere, readable
`show`. Every table command is read at 60, 80 and 120 columns, and each label,
date and figure it holds must appear whole, with no line wider than the
terminal and no ellipsis."""

import json
import os
import pty
import re
import select
import subprocess
import sys
from pathlib import Path

import pytest
from rich.cells import cell_len

from glowtrace.analysis.csvio import write_curve
from glowtrace.cli import console, main
from glowtrace.cli.demo import render_demo
from glowtrace.cli.figures import gains_table
from curves import first_order

GLOWTRACE = str(Path(sys.executable).parent / "glowtrace")
WIDTHS = (60, 80, 120)


def screen(capsys, monkeypatch, width, *args):
    """(exit code, stdout, stderr) of one command at a terminal width."""
    monkeypatch.setenv("COLUMNS", str(width))
    rc = main(list(args))
    out, err = capsys.readouterr()
    return rc, out, err


def assert_whole(text: str, width: int, items) -> None:
    for line in text.splitlines():
        assert cell_len(line.rstrip()) <= width, f"wider than {width}: {line!r}"
    assert "…" not in text, "something was cut"
    for item in items:
        assert str(item) in text, f"{item!r} is not shown whole:\n{text}"


def flat(text: str) -> str:
    return " ".join(text.split())


def demo_tubes(demo_run):
    return {t["tube"]: t for t in demo_run[1]["tubes"]}


@pytest.mark.parametrize("width", WIDTHS)
def test_history_keeps_dates_and_figures_whole(demo_run, capsys, monkeypatch, width):
    db, _ = demo_run
    label = next(t for t, a in demo_tubes(demo_run).items() if a["status"] == "at limit")
    rc, js, _ = screen(capsys, monkeypatch, width, "history", label, "--db", str(db), "--json")
    result = json.loads(js)
    rc, out, _ = screen(capsys, monkeypatch, width, "history", label, "--db", str(db))
    assert rc == 0
    whole = [label]
    for c in result["captures"]:
        whole += [c["at"][:10], console.fmt(c["cold_resistance_20c_ohm"], 4),
                  console.fmt(c["rated_hot_current_a"], 4), console.fmt(c["flash_index"], 2)]
    assert_whole(out, width, whole)
    # 0.0099 and 0.071 read as themselves, not as "0.0…"
    assert any(console.fmt(c["flash_index"], 2) not in ("0", "0.0") for c in result["captures"])
    text = flat(out)
    for reason in result["reasons"]:
        assert flat(reason) in text
    # reasons wrap under themselves: a continuation line is indented past the bullet
    lines = out.splitlines()
    start = next(k for k, line in enumerate(lines) if line.startswith("Status:"))
    for line in lines[start + 1:]:
        assert line.startswith(("  - ", "    ")), f"flush-left continuation: {line!r}"
    if width < 120:
        assert "Not shown at this width" in out


@pytest.mark.parametrize("width", WIDTHS)
def test_list_stock_and_records_at_every_width(demo_run, capsys, monkeypatch, width):
    db, _ = demo_run
    rc, js, _ = screen(capsys, monkeypatch, width, "list", "--db", str(db), "--json")
    rows = json.loads(js)
    rc, out, _ = screen(capsys, monkeypatch, width, "list", "--db", str(db))
    assert rc == 0
    assert_whole(out, width, [x for r in rows for x in
                              (r["uuid"][:8], r["tube"], r["started_at"][:19].replace("T", " "))])

    rc, js, _ = screen(capsys, monkeypatch, width, "stock", "--db", str(db), "--json")
    stock = json.loads(js)
    rc, out, _ = screen(capsys, monkeypatch, width, "stock", "--db", str(db))
    assert_whole(out, width, [x for r in stock for x in (r["tube"], r["grade"] or "-",
                                                          r["status"])]
                 + [f"{100 * v:+.1f}" for r in stock for v in r["current_deviation"].values()])

    rc, out, _ = screen(capsys, monkeypatch, width, "owner", "list", "--db", str(db))
    from glowtrace.procedures.demo import CUSTOMERS, DEMO_TUBES
    assert_whole(out, width, list(CUSTOMERS))
    rc, out, _ = screen(capsys, monkeypatch, width, "tube", "list", "--db", str(db))
    assert_whole(out, width, {t.label for t in DEMO_TUBES} | {t.tube_type for t in DEMO_TUBES})
    rc, out, _ = screen(capsys, monkeypatch, width, "tube", "show", DEMO_TUBES[0].label,
                        "--db", str(db))
    assert_whole(out, width, [DEMO_TUBES[0].label, DEMO_TUBES[0].owner])


@pytest.mark.parametrize("width", WIDTHS)
def test_demo_tables_at_every_width(demo_run, capsys, monkeypatch, width):
    db, res = demo_run
    monkeypatch.setenv("COLUMNS", str(width))
    console.setup("never")
    render_demo(res, db, 1.0)
    gains_table(res["calibration"])
    out = capsys.readouterr().out
    # what a row is about, and its verdict, at any width
    whole = [c["tube"] for c in res["captures"]] + [a["status"] for a in res["tubes"]]
    whole += [a["grade"] for a in res["tubes"] if a["grade"]]
    whole += [console.fixed(c[f"final_a_{s}"], 3) for c in res["captures"] for s in c["section"]]
    whole += [f"{g['gain']:.5f}" for v in res["calibration"]["channels"].values()
              for g in (v.values() if "gain" not in v else [v])]
    if width >= 120:  # the lesser columns too, once there is room
        whole += [f"{c[f'peak_a_{s}']:.3f}" for c in res["captures"] for s in c["section"]]
        whole += [c["customer"] for c in res["captures"]]
    else:
        assert "Not shown at this width" in out
    assert_whole(out, width, whole)
    assert flat(res["tubes"][0]["reasons"][0]) in flat(out)


@pytest.mark.parametrize("width", WIDTHS)
def test_types_analyze_and_ports_at_every_width(capsys, monkeypatch, tmp_path, width):
    from glowtrace import catalogue
    rc, out, _ = screen(capsys, monkeypatch, width, "types")
    assert rc == 0
    assert_whole(out, width, [r["type"] for r in catalogue.listing()])

    csv = tmp_path / "curve.csv"
    write_curve(csv, first_order(r_cold=6.0, r_hot=42.0, tau=2.0, volts=6.3))
    rc, out, err = screen(capsys, monkeypatch, width, "analyze", str(csv), "--type", "12AX7",
                          "--ambient-c", "21")
    assert rc == 0
    assert_whole(out, width, ["cold resistance at 20 C", "warm-up to 90 %", "hot current"])

    import glowtrace.tester.ports as ports
    fake = [{"device": "/dev/ttyACM0", "description": "Board in FS mode with a long name "
             "from the USB descriptor", "usb_id": "2E8A:0005", "serial_number": "E66",
             "micropython_rp2": True, "glowtrace": True, "firmware": "0.1.0",
             "board": "rp2-e660583883"}]
    monkeypatch.setattr(ports, "scan", lambda probe_boards=True: fake)
    rc, out, _ = screen(capsys, monkeypatch, width, "ports")
    assert_whole(out, width, ["/dev/ttyACM0", "rp2-e660583883"])


def _flash_capture(demo_run):
    """Today's capture of the flashing section, whose light channel clips."""
    db, res = demo_run
    return next(c for c in res["captures"] if c.get("clipped_channels"))


@pytest.mark.parametrize("width", WIDTHS)
def test_show_reads_like_analyze_and_warns_of_clipping(demo_run, capsys, monkeypatch, width):
    db, res = demo_run
    cap = _flash_capture(demo_run)
    rc, out, err = screen(capsys, monkeypatch, width, "show", cap["uuid"][:8], "--db", str(db))
    assert rc == 0
    cal = res["calibration"]
    assert_whole(out, width, [cap["uuid"], "cold resistance at 20 C", "flash index",
                              cal["at"][:19].replace("T", " "), cal["board"],
                              f"{cal['channels']['v']['gain']:.5f}"])
    assert "calibrated on " + cal["board"] in flat(out)
    # no internal keys or Python dicts on the screen
    for raw_key in ("peak_a_", "final_a_", "glow_peak_over_settled", "{'", "None"):
        assert raw_key not in out
    # the simulated photodiode saturates on this flash: the screen says so
    assert "light (photodiode) reached the top of the converter's range" in flat(err)
    assert "at least" in out
    rc, js, _ = screen(capsys, monkeypatch, width, "show", cap["uuid"], "--db", str(db),
                       "--json")
    assert json.loads(js)["clipped_channels"] == ["light"]


def test_global_options_before_or_after_the_command(demo_run, capsys, monkeypatch):
    db, _ = demo_run
    after = screen(capsys, monkeypatch, 80, "list", "--db", str(db), "--json")
    before = screen(capsys, monkeypatch, 80, "--db", str(db), "--json", "list")
    mixed = screen(capsys, monkeypatch, 80, "--db", str(db), "list", "--json")
    assert after[0] == before[0] == mixed[0] == 0
    assert json.loads(after[1]) == json.loads(before[1]) == json.loads(mixed[1])
    nested = screen(capsys, monkeypatch, 80, "--json", "--db", str(db), "owner", "list")
    assert len(json.loads(nested[1])) == 3
    rc, out, _ = screen(capsys, monkeypatch, 80, "--color", "always", "--db", str(db), "list",
                        "--color", "never")
    assert rc == 0 and "\x1b[" not in out  # the option nearest the command's end wins


# colour ---------------------------------------------------------------------
def _env(**settings) -> dict:
    """This environment without the variables that steer colour, plus settings."""
    env = {k: v for k, v in os.environ.items()
           if k not in ("NO_COLOR", "FORCE_COLOR", "TTY_COMPATIBLE")}
    return dict(env, **settings)


def _piped(*args, env=None):
    return subprocess.run([GLOWTRACE, *args], capture_output=True, text=True, timeout=120,
                          env=_env(**(env or {})))


def _on_a_terminal(*args, env):
    """Output of the command run on a pseudo-terminal, as a person sees it."""
    master, slave = pty.openpty()
    p = subprocess.Popen([GLOWTRACE, *args], stdin=slave, stdout=slave, stderr=slave,
                         env=_env(COLUMNS="100", **env), close_fds=True)
    os.close(slave)
    chunks = []
    while True:
        ready, _, _ = select.select([master], [], [], 60)
        if not ready:
            break
        try:
            data = os.read(master, 65536)
        except OSError:  # the slave side closed: the command is done
            break
        if not data:
            break
        chunks.append(data)
    p.wait(60)
    os.close(master)
    return b"".join(chunks).decode(errors="replace")


def test_no_colour_when_piped_or_asked(demo_run):
    db, res = demo_run
    label = next(t for t, a in demo_tubes(demo_run).items() if a["status"] == "at limit")
    for args in (("history", label), ("list",), ("stock",), ("show", res["captures"][0]["uuid"])):
        r = _piped(*args, "--db", str(db), env={"TERM": "xterm-256color"})
        assert r.returncode == 0, r.stderr
        assert "\x1b[" not in r.stdout + r.stderr, f"escape codes in piped {args[0]}"
    forced = _piped("history", label, "--db", str(db), "--color", "always")
    assert "\x1b[" in forced.stdout  # the colour exists, and can be asked for


@pytest.mark.parametrize("env,colour", [({"TERM": "xterm-256color"}, True),
                                        ({"TERM": "xterm-256color", "NO_COLOR": "1"}, False),
                                        ({"TERM": "dumb"}, False)])
def test_colour_on_a_terminal_follows_no_color_and_dumb(demo_run, env, colour):
    db, _ = demo_run
    label = next(t for t, a in demo_tubes(demo_run).items() if a["status"] == "at limit")
    text = _on_a_terminal("history", label, "--db", str(db), env=env)
    assert "Status:" in text
    assert ("\x1b[" in text) == colour
    if not colour:
        never = _on_a_terminal("history", label, "--db", str(db), "--color", "never",
                               env={"TERM": "xterm-256color"})
        assert "\x1b[" not in never


def _style_before(text: str, word: str) -> str:
    """The SGR sequence that opens `word` in coloured output."""
    m = re.search(r"((?:\x1b\[[0-9;]*m)+)" + re.escape(word), text)
    assert m, f"{word!r} is not coloured"
    return m.group(1)


def test_one_palette_for_status_words(demo_run, capsys, monkeypatch):
    db, res = demo_run
    label = next(t for t, a in demo_tubes(demo_run).items() if a["status"] == "at limit")
    rc, hist, _ = screen(capsys, monkeypatch, 120, "history", label, "--db", str(db),
                         "--color", "always")
    rc, stock, _ = screen(capsys, monkeypatch, 120, "stock", "--db", str(db), "--color", "always")
    console.setup("always")
    render_demo(res, db, 1.0)
    demo = capsys.readouterr().out
    # bold in the status line is emphasis; the colour is the same everywhere
    codes = [_style_before(t, "at limit") for t in (hist, stock, demo)]
    colours = [re.findall(r"3[0-9](?:;5;[0-9]+)?|9[0-7]", c) for c in codes]
    assert colours[0] == colours[1] == colours[2] and colours[0], codes
    steady = [_style_before(t, "steady") for t in (stock, demo)]
    assert steady[0] == steady[1]
