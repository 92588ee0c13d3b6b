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
        # the board's pull-up on the 1-Wire line, no sensor fitted: an
        # emulated input floats low, which reads as a bus full of devices
        assert e.command(f"setin {FRONTEND['gpio']['ambient_1wire']} 1") == "ok"
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


def _codes(volts_at_adc):
    """Converter codes of a voltage at the ADC pin (12 bits over vref)."""
    import numpy as np
    adc = FRONTEND["adc"]
    return np.clip(np.round(np.asarray(volts_at_adc) / adc["vref_v"] * (1 << adc["bits"])),
                   0, (1 << adc["bits"]) - 1)


def test_a_short_capture_through_the_real_board_layer(installed, tmp_path):
    """A fast heater's switch-on (the thermal model, from cold at 6.3 V) fed to
    the converter from the instant the firmware's gate goes high: the host
    decodes a capture whose current matches it within the converter's
    resolution, in the schedule's timing, on the right channels."""
    import numpy as np
    from glowtrace.analysis.thermal import ThermalModel
    from glowtrace.logbook.store import Store
    from glowtrace.tester.convert import to_physical
    from glowtrace.cli import main
    fast = ThermalModel(r20=6.2, k=1.0, t_amb_k=295.15, r_hot=42.0, p_hot=6.3 ** 2 / 42.0,
                        dt_ws=140.0, tau_w=0.05, tau_s=0.4)
    low = FRONTEND["current_ranges"]["low"]
    r_path = low["shunt_ohm"] + FRONTEND["switch"]["rds_on_ohm"]
    t, _, i, _ = fast.in_circuit(6.3, r_path, t_end=10.0, n=400)
    ia = _codes(i / low["amps_per_volt"])
    v_code = int(_codes(6.3 / FRONTEND["voltage_divider"]["volts_per_volt"]))
    ch = {c["name"]: c["adc_input"] for c in FRONTEND["channels"]}
    table = {"ch": ch["ia"], "gate": GATES[0], "off": 0, "t_us": (t * 1e6).tolist(),
             "code": ia.tolist()}
    assert installed.command("adctable " + json.dumps(table)) == "ok"
    assert installed.command(f"adc {ch['v']} {v_code}") == "ok"
    db = tmp_path / "emu.db"
    rc = main(["capture", "--port", installed.port, "--tube", "EMU-1", "--type", "12AX7",
               "--section", "A", "--max-s", "3", "--db", str(db), "--json"])
    assert rc in (0, 2)
    with Store(db) as s:
        raw = s.load_capture(s.list_captures()[0]["uuid"])
    assert raw.complete, raw.incomplete_reason
    assert raw.channels == ["ia", "v"]  # the switched section's current and the voltage
    # the schedule's timing: the dense phase a set every 8 us per channel, then
    # 250 us, 2 ms (firmware/glowfw/schedule.py)
    intervals = sorted({b.interval_us for b in raw.blocks if b.phase > 0})
    assert intervals[:3] == [16, 250, 2000], intervals
    c = to_physical(raw)
    on = c.t_s >= 0
    lsb = low["amps_per_volt"] * FRONTEND["adc"]["vref_v"] / (1 << FRONTEND["adc"]["bits"])
    expect = np.interp(c.t_s[on], t, ia) * lsb
    err = np.abs(c.amps["A"][on] - expect)
    # within two codes, the inrush included (a conversion takes 2 us of a changing curve)
    ts = c.t_s[on]
    by_phase = {name: float(err[(ts >= a) & (ts < b)].max() / lsb) if ((ts >= a) & (ts < b)).any()
                else None for name, a, b in (("dense", 0, 0.02), ("fast", 0.02, 0.5),
                                             ("mid", 0.5, 5), ("slow", 5, 99))}
    assert np.percentile(err, 99) <= 2 * lsb, by_phase
    # the converter runs before the gate closes: the first set after switch-on
    # is within a set of it (16 us), and the inrush's peak is measured, within
    # what the current falls in that first set (it starts near 0.2 code per us)
    assert c.t_s[on][0] <= 16e-6, c.t_s[on][:3]
    assert abs(c.amps["A"][on].max() - ia.max() * lsb) <= 4 * lsb
    assert abs(np.median(c.volts[on]) - 6.3) < 0.02  # the voltage channel, not a current


# --- the trips, timed from the gate's GPIO events in emulated time -----------

CH = {c["name"]: c["adc_input"] for c in FRONTEND["channels"]}
LOW = FRONTEND["current_ranges"]["low"]
LSB_A = LOW["amps_per_volt"] * FRONTEND["adc"]["vref_v"] / (1 << FRONTEND["adc"]["bits"])


def _feed_section_a(emu, t_us, codes, volts=6.3):
    """Section A's current follows (t_us, codes) from its gate's rising edge."""
    table = {"ch": CH["ia"], "gate": GATES[0], "off": 0, "t_us": list(t_us),
             "code": list(codes)}
    assert emu.command("adctable " + json.dumps(table)) == "ok"
    v_code = int(_codes(volts / FRONTEND["voltage_divider"]["volts_per_volt"]))
    assert emu.command(f"adc {CH['v']} {v_code}") == "ok"


def _gate_on_and_off(emu, since: int) -> tuple[int, int]:
    """Emulated times (us) the gate went high and then low after event `since`."""
    ev = emu.gpio_events(GATES[0], since)
    assert any(s == "High" for _, s in ev), (ev, emu.events[since:][-10:])
    on = next(t for t, s in ev if s == "High")
    off = next(t for t, s in ev if s == "Low" and t >= on)
    assert "High" not in [s for _, s in emu.gpio_events(GATES[1], since)]
    return on, off


def _capture(emu, **params):
    from glowtrace.tester.driver import connect
    resets = emu.watchdog_resets_us()
    with connect(emu.port, timeout=float(WAIT_S)) as t:
        raw = t.capture("EMU", "A", {"max_s": 3, **params})
    assert emu.watchdog_resets_us() == resets, "the watchdog fired during the capture"
    return raw


NORMAL_CODE = 1500  # a heater drawing about a third of the low range


@pytest.mark.parametrize("short_at_us", [3000, 700000], ids=["dense phase", "mid phase"])
def test_a_short_switches_the_gate_off_within_1_ms(installed, short_at_us):
    """The current jumps to full scale at short_at_us after switch-on: the gate
    is low within 1 ms of it (the first sample over the threshold is at or
    after that instant, so this bounds the reaction from that sample too)."""
    _feed_section_a(installed, [0, short_at_us, short_at_us + 1, 1e8],
                    [NORMAL_CODE, NORMAL_CODE, 4095, 4095])
    since = len(installed.events)
    raw = _capture(installed)
    assert raw.trip_cause == "over_current", (raw.trip, raw.end)
    on, off = _gate_on_and_off(installed, since)
    assert 0 <= off - (on + short_at_us) <= 1000, off - on


def test_an_open_section_is_switched_off_after_the_open_check(installed):
    _feed_section_a(installed, [0, 1e8], [0, 0])
    since = len(installed.events)
    raw = _capture(installed)
    on, off = _gate_on_and_off(installed, since)
    assert raw.trip_cause == "open_heater", (raw.trip, raw.end)
    # the check runs once the dense phase (20 ms) is in; the firmware's work
    # between the transfer and the check took 5.5 ms on the emulated chip
    assert 20000 <= off - on <= 30000, off - on


def test_a_stalled_converter_switches_off_at_once_not_at_the_watchdog(installed):
    """Found on the emulator: a converter that stops held the DMA wait, the
    heater on, until the watchdog fired."""
    _feed_section_a(installed, [0, 1e8], [NORMAL_CODE, NORMAL_CODE])
    assert installed.command(f"adcstall 1 {GATES[0]} 100000") == "ok"  # in the fast phase
    since = len(installed.events)
    try:
        raw = _capture(installed)
    finally:
        assert installed.command("adcstall 0") == "ok"
    on, off = _gate_on_and_off(installed, since)
    assert raw.trip_cause == "exception" and "stalled" in raw.trip["detail"], raw.trip
    # the wait's limit runs from its chunk's start: the fast phase's chunk
    # (20 ms) plus an eighth and 2 ms; that chunk began at most a chunk and
    # its sending (bench/rp2emu_bench.py) after the stall
    assert off - (on + 100000) <= 24500 + 20000, off - on
    assert not installed.watchdog_resets_us() or installed.watchdog_resets_us()[-1] < on


def test_host_silence_switches_off(installed):
    """The host sends the capture command, then nothing: the gate is low once
    the silence passes silence_ms (checked after each chunk of sets)."""
    from glowtrace.tester import protocol
    from glowtrace.tester.link import Link
    from glowtrace.tester.transport import open_port
    _feed_section_a(installed, [0, 1e8], [NORMAL_CODE, NORMAL_CODE])
    since = len(installed.events)
    port = open_port(installed.port)
    try:
        link = Link(port)
        link.send(protocol.CAPTURE, b'{"section": "A", "max_s": 10, "silence_ms": 1000}')
        trip = None
        import time
        deadline = time.monotonic() + float(WAIT_S)
        while trip is None and time.monotonic() < deadline:
            f = link.receive(0.5)  # listen, never send
            if f is not None and f.mtype == protocol.TRIP:
                trip = f.json()
    finally:
        port.close()
    assert trip is not None and trip["cause"] == "host_silent", trip
    on, off = _gate_on_and_off(installed, since)
    # heard last at switch-on; checked after each chunk: the mid phase's chunk
    # is 100 ms of sets, and its frames go out before the check (up to about
    # 25 ms on the emulated USB, bench/rp2emu_bench.py)
    assert 1000000 <= off - on <= 1000000 + 100000 + 30000, off - on


def test_a_hang_is_ended_by_the_watchdog_with_the_gates_low_through_the_reset(installed):
    """The core stops in a loop with interrupts off while the heater is on:
    only the watchdog ends it; the gate stays as it was until the reset, the
    board's pull-down holds it low through it, and the firmware that boots
    drives it low and says why it reset."""
    from glowtrace.tester import protocol
    from glowtrace.tester.link import Link
    from glowtrace.tester.transport import open_port
    import time
    _feed_section_a(installed, [0, 1e8], [NORMAL_CODE, NORMAL_CODE])
    since = len(installed.events)
    port = open_port(installed.port)
    try:
        Link(port).send(protocol.CAPTURE, b'{"section": "A", "max_s": 10}')
        deadline = time.monotonic() + float(WAIT_S)
        while not installed.gpio_events(GATES[0], since) and time.monotonic() < deadline:
            time.sleep(0.05)
        hung_at = int(installed.command("hang").split("t_us=")[1])
        deadline = time.monotonic() + float(WAIT_S)
        while (not [t for t in installed.watchdog_resets_us() if t > hung_at]
               and time.monotonic() < deadline):
            time.sleep(0.2)
    finally:
        port.close()
    resets = [t for t in installed.watchdog_resets_us() if t > hung_at]
    assert resets, ("the watchdog did not fire", hung_at, installed.watchdog_resets_us())
    wdt_s = 3.0  # _WDT_MS in firmware/board_rp2.py
    assert resets[0] - hung_at <= wdt_s * 1e6 + 10000, resets[0] - hung_at
    hello = _version(installed.port)  # the firmware is back
    assert hello["reset_cause"] == "wdt_reset"
    ev = installed.gpio_events(GATES[0], since)
    assert [s for _, s in ev if _ < hung_at] == ["High"]  # on, and then the hang
    # through the reset the pin is an input with its pull-down (the board's
    # gate resistor in hardware), then the firmware drives it low
    after = [s for t, s in ev if t >= hung_at]
    assert set(after) <= {"InputPullDown", "Low"} and after[-1] == "Low", ev
    for pin in GATES:
        assert "High" not in [s for t, s in installed.gpio_events(pin, since) if t >= hung_at]
