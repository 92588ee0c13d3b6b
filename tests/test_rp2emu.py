"""The real firmware on an emulated RP2040 (fixtures_hw/rp2emu): the rp2 board
layer, the install path through mpy-cross and mpremote, the gates at boot.

Slow (the chip runs at about a tenth of real time): marked `rp2emu` and left
out of the default run; `python -m pytest -m rp2emu -n 0` runs them, and
`.ci/run` does. They skip, saying what is missing, without node, the npm
packages (`npm ci` in fixtures_hw/rp2emu) or the MicroPython bundle."""

import json
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "fixtures_hw" / "rp2emu"))
import emulator  # noqa: E402

pytestmark = [pytest.mark.rp2emu,
              pytest.mark.skipif(emulator.missing() is not None,
                                 reason=f"rp2emu: {emulator.missing()}")]

FRONTEND = json.loads((ROOT / "schematics" / "frontend.json").read_text())
GATES = (FRONTEND["gpio"]["switch_a"], FRONTEND["gpio"]["switch_b"])
WAIT_S = "120"  # an emulated boot: the REPL window and the imports at a tenth of real time


@pytest.fixture(scope="module")
def emu(tmp_path_factory):
    d = tmp_path_factory.mktemp("rp2emu")
    with emulator.Rp2Emulator(d / "flash.img") as e:
        yield e


@pytest.fixture(scope="module")
def installed(emu):
    """The firmware installed as a user installs it."""
    from glowtrace.cli import main
    rc = main(["firmware", "install", "--port", emu.port, "--wait-s", WAIT_S, "--json"])
    assert rc == 0
    return emu


def _version(port: str) -> dict:
    from glowtrace.tester.ports import probe
    hello = probe(port, timeout=float(WAIT_S))
    assert hello is not None, "the firmware did not answer"
    return hello


def test_install_answers_with_this_version_and_a_reset_keeps_it(installed):
    from glowtrace.tester import firmware
    from glowtrace.tester.driver import connect
    hello = _version(installed.port)
    assert hello["firmware"] == firmware.firmware_version()
    assert hello["board"].startswith("rp2-") and hello["channels"][:2] == ["ia", "ib"]
    cal = {"source": "emulator test", "at": "2026-12-02", "gain": 1.0, "offset_codes": 0}
    with connect(installed.port, timeout=float(WAIT_S)) as t:
        t.set_calibration(cal)
    assert installed.command("reset") == "ok"  # power off and on: the flash stays
    again = _version(installed.port)
    assert again["firmware"] == hello["firmware"]
    assert again["calibration"]["source"] == "emulator test"


def test_gates_are_driven_low_at_every_boot_and_never_high(installed):
    # every boot seen so far (the install's restart, the reset above, ...):
    # the gate pins go from their pull-down straight to driven low
    boots = [t for t, s in installed.gpio_events(GATES[0]) if s == "Low"]
    assert boots, installed.events[-20:]
    for pin in GATES:
        states = [s for _, s in installed.gpio_events(pin)]
        assert "High" not in states, (pin, states)
        assert states and states[-1] == "Low", (pin, states)
