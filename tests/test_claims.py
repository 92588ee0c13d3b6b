"""What the README and the help promise holds: every command and option the
README shows exists in --help, every simulator setting is in `sim --help` and
in the README, the simulated board keeps its calibration per serial, the
commands the README says refuse do refuse, and the demo's names are
plainly invented."""

import json
import re
import shlex
import subprocess
import sys
from pathlib import Path

import pytest

from glowtrace import paths
from glowtrace.cli import main
from glowtrace.procedures import demo
from glowtrace.tester.driver import connect
from glowtrace.tester.sim import SETTINGS

README = (Path(__file__).resolve().parent.parent / "README.md").read_text()
WITH_ACTIONS = ("owner", "tube")  # commands whose first word is a sub-command


def help_text(capsys, monkeypatch, *words) -> str:
    monkeypatch.setenv("COLUMNS", "200")
    with pytest.raises(SystemExit) as e:
        main([*words, "--help"])
    assert e.value.code == 0
    return capsys.readouterr().out


def readme_command_lines():
    for block in re.findall(r"```\n(.*?)```", README, re.S):
        for line in block.splitlines():
            if line.startswith("glowtrace "):
                yield line.split(" #")[0].strip()


def test_every_readme_command_and_option_is_in_its_help(capsys, monkeypatch):
    lines = list(readme_command_lines())
    assert len(lines) >= 25  # the examples of "Using it" and "A real tester"
    for line in lines:
        words = [w.strip("[]") for w in shlex.split(line)[1:]]
        words = [w for w in words if w]
        command = next(w for w in words if not w.startswith("-"))
        if command == "COMMAND":
            continue
        after = words[words.index(command) + 1:]
        actions = [None]
        if command in WITH_ACTIONS:
            actions = [w for w in after if not w.startswith("-") and w != "|"]
            actions = actions[:1] if "|" not in after else actions
        for action in actions:
            text = help_text(capsys, monkeypatch, command, *([action] if action else []))
            for opt in (w.split("=")[0] for w in words if w.startswith("--")):
                assert opt in text, f"README: `{line}`: {opt} is not in its --help"
        if command == "firmware":
            assert after[0] in help_text(capsys, monkeypatch, "firmware")


def test_every_option_the_readme_names_exists(capsys, monkeypatch):
    texts = [help_text(capsys, monkeypatch)]
    commands = re.findall(r"^    (\w+) ", texts[0], re.M)
    assert "capture" in commands and "history" in commands
    for c in commands:
        texts.append(help_text(capsys, monkeypatch, c))
    for c in WITH_ACTIONS:
        for a in re.findall(r"^    (\w+) ", help_text(capsys, monkeypatch, c), re.M):
            texts.append(help_text(capsys, monkeypatch, c, a))
    everything = "\n".join(texts)
    for opt in set(re.findall(r"(?<![\w-])(--[a-z][a-z-]+)", README)):
        assert opt in everything, f"the README names {opt}, which no command has"


def test_sim_help_and_readme_list_every_simulator_setting(capsys, monkeypatch):
    text = help_text(capsys, monkeypatch, "sim")
    for key, setting in SETTINGS.items():
        assert "--" + key.replace("_", "-") in text, f"sim --help lacks {key}"
        assert " ".join(setting.help.split()[:3]) in " ".join(text.split())
        if key != "state_dir" or "state_dir" in README:
            assert f"`{key}`" in README, f"the README does not list the setting {key}"


def test_the_simulated_board_keeps_its_calibration_per_serial(tmp_path, capsys):
    db = str(tmp_path / "cal.db")
    assert main(["calibrate", "--port", "glowsim://?serial=BENCH1", "--supply-v", "6.3",
                 "--db", db, "--json"]) == 0
    cal = json.loads(capsys.readouterr().out)
    # a later, separate start of the same simulated board, as after a power cycle
    with connect("glowsim://?serial=BENCH1&seed=3") as t:
        assert t.hello["calibration"]["at"] == cal["at"]
    with connect("glowsim://?serial=BENCH2") as t:
        assert (t.hello.get("calibration") or {}).get("source") != "calibrated"
    assert (paths.data_dir() / "sim" / "BENCH1" / "calibration.json").exists()
    assert main(["capture", "--port", "glowsim://?serial=BENCH1", "--tube", "K", "--type",
                 "12AX7", "--section", "A", "--max-s", "6", "--db", db, "--json"]) in (0, 2)
    cap = json.loads(capsys.readouterr().out)
    assert not any("not calibrated" in w for w in cap.get("warnings", []))


def test_serial_cannot_escape_the_sim_folder():
    assert paths.sim_state_dir("../../etc").parent == paths.data_dir() / "sim"
    assert paths.sim_state_dir("..").name not in ("", ".", "..")


def test_firmware_install_refuses_the_simulated_tester_as_the_readme_says(capsys):
    assert "but\n`firmware install` also works" in README
    assert main(["firmware", "install", "--port", "glowsim://"]) == 1
    assert "nothing to install" in capsys.readouterr().err


def test_db_defaults_to_glowtrace_db(tmp_path, monkeypatch, capsys):
    monkeypatch.setenv("GLOWTRACE_DB", str(tmp_path / "mine.db"))
    assert main(["owner", "add", "Ines Parrowby"]) == 0
    assert (tmp_path / "mine.db").exists()


def test_python_dash_m_is_the_same_command():
    r = subprocess.run([sys.executable, "-m", "glowtrace", "--version"], capture_output=True,
                       text=True, timeout=60)
    assert r.returncode == 0 and r.stdout.startswith("glowtrace ")


# the demo's invented scenario -------------------------------------------------
# Words that are brands, companies or real places, which an invented name must
# not contain: the first two were in earlier demo names (a line of handheld
# meters; a network-equipment maker, and a real place of that name). Add to the
# list whenever a name turns out to be someone's.
NOT_INVENTED = {"kestrel", "juniper", "fluke", "keysight", "tektronix", "rigol", "siglent",
                "cisco", "mullard", "telefunken", "sylvania", "rca", "tung-sol", "sovtek"}


def _words(name: str) -> set[str]:
    return {w.lower() for w in re.findall(r"[A-Za-z][A-Za-z-]*", name)}


def test_demo_names_are_plainly_invented():
    names = [demo.SHOP, *demo.CUSTOMERS, *[t.owner for t in demo.DEMO_TUBES]]
    for name in names:
        hit = _words(name) & NOT_INVENTED
        assert not hit, f"demo name {name!r} uses {hit}: choose an invented name"
    assert "invented" in demo.SHOP
    # every tube belongs to a demo customer, labelled with the shop's own prefix
    prefix = {t.label.split("-")[0] for t in demo.DEMO_TUBES}
    assert len(prefix) == 1
    assert all(t.owner in demo.CUSTOMERS for t in demo.DEMO_TUBES)
    assert demo.TESTER["serial"].startswith(prefix.pop())


def test_the_readme_examples_use_the_demo_names():
    owners = set(re.findall(r'--owner "([^"]+)"', README))
    assert owners and owners <= set(demo.CUSTOMERS)
    labels = set(re.findall(r"\b([A-Z]{2}-\d{4}-V\d)\b", README))
    assert labels and labels <= {t.label for t in demo.DEMO_TUBES}
