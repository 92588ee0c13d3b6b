"""The real firmware on the simulated tester: captures, trips and resets."""

import time

import numpy as np
import pytest

from glowtrace.tester import protocol
from glowtrace.tester.convert import to_physical
from glowtrace.tester.driver import CaptureInterrupted
from simhelp import sim_tester


def test_handshake_reports_versions_board_and_calibration():
    with sim_tester(serial="0042") as t:
        h = t.hello
    assert h["protocol"] == protocol.PROTOCOL_VERSION
    assert h["board"] == "sim-0042" and h["firmware"]
    assert h["channels"] == ["ia", "ib", "v"]
    assert "gain" in h["calibration"] and h["frontend"]["adc"]["bits"] == 12


def test_capture_is_whole_and_timed():
    with sim_tester(tube="12AX7", seed=3) as t:
        raw = t.capture("T", "AB", {"max_s": 30})
        status = t.status()
    assert raw.complete and raw.end_reason == "settled"
    assert status["heater"] == 0 and status["state"] == "idle"
    t_us, sums, osm = raw.arrays()
    assert (t_us[t_us < 0] >= -40000).all() and (t_us >= 0).sum() > 5000
    assert np.all(np.diff(t_us) > 0)
    dense = t_us[(t_us >= 0) & (t_us < 20000)]
    assert len(dense) >= 800  # >= 100 kS/s aggregate over 3 channels for 20 ms
    assert set(np.unique(osm)) == {1, 8, 16}


def test_trip_on_shorted_heater_within_1ms():
    with sim_tester(fault="short", fault_section="A") as t:
        raw = t.capture("T", "A", {"range": "high", "trip_a": 20})
        status = t.status()
    assert raw.trip["cause"] == "over_current"
    assert raw.end["reason"] == "trip" and 0 <= raw.end["off_us"] <= 1000
    assert status["heater"] == 0


def test_trip_on_open_heater():
    with sim_tester(fault="open", fault_section="B") as t:
        raw = t.capture("T", "AB", {})
    assert raw.trip["cause"] == "open_heater"
    assert 20000 <= raw.trip["at_us"] <= 25000


def test_trip_after_max_on_time():
    with sim_tester() as t:
        raw = t.capture("T", "A", {"max_s": 60, "max_on_s": 1.0, "settle_min_s": 50})
    assert raw.trip["cause"] == "max_on_time"
    assert 1.0e6 <= raw.trip["at_us"] <= 1.2e6


def test_trip_when_host_goes_silent():
    # pace=1: the simulated heater runs in real time, so host silence is real
    with sim_tester(pace=1.0) as t:
        t.link.send(protocol.CAPTURE, b'{"section": "A", "silence_ms": 500}')
        t0 = time.monotonic()
        trip = None
        while time.monotonic() - t0 < 5 and trip is None:
            f = t.link.receive(0.2)  # listen, never send: the host is "silent"
            if f is not None and f.mtype == protocol.TRIP:
                trip = f.json()
        status = t.status()
    assert trip is not None and trip["cause"] == "host_silent"
    assert trip["at_us"] <= 1.5e6  # paced: never ahead of the wall clock
    assert status["heater"] == 0


def test_firmware_error_switches_off_and_keeps_running():
    with sim_tester(fault="converter") as t:
        raw = t.capture("T", "A", {})
        status = t.status()
    assert raw.trip["cause"] == "exception" and "converter" in raw.trip["detail"]
    assert status["heater"] == 0 and status["state"] == "idle"


def test_board_reset_mid_capture_is_reported_incomplete():
    with sim_tester(reset_at_s=1.0) as t:
        with pytest.raises(CaptureInterrupted) as e:
            t.capture("T", "A", {})
        assert "reset" in e.value.reason
        assert e.value.raw.blocks and e.value.raw.end is None
        assert t.status()["heater"] == 0


def test_refused_parameters_give_the_firmware_reason():
    from glowtrace.errors import DeviceError
    with sim_tester() as t:
        with pytest.raises(DeviceError, match="unknown capture parameter"):
            t.capture("T", "A", {"bogus": 1})


def test_supply_sag_is_visible_on_voltage_channel():
    with sim_tester(source_ohm=1.0) as t:
        raw = t.capture("T", "AB", {"max_s": 5})
    c = to_physical(raw)
    on = c.t_s >= 0
    v_early = c.volts[on][:5].mean()
    v_late = c.volts[on][-50:].mean()
    assert v_early < 0.85 * v_late  # inrush through 1 ohm pulls the supply down


def test_intermittent_contact_shows_as_dropouts():
    with sim_tester(fault="intermittent", fault_section="A") as t:
        raw = t.capture("T", "A", {"max_s": 3, "settle_min_s": 10})
    c = to_physical(raw)
    fast = (c.t_s > 0.02) & (c.t_s < 0.5)  # 250 us sets: a 4 ms open is 16 of them
    i = c.amps["A"][fast]
    assert (i < 0.01).sum() >= 15 and (i > 0.1).sum() > 1000


def test_scenario_overrides_the_preset_heater():
    with sim_tester(tube="12AX7", section_v=12.6, section_a=0.1, supply_v=12.6) as t:
        raw = t.capture("T", "A", {"max_s": 40})
    c = to_physical(raw)
    assert c.amps["A"][-50:].mean() == pytest.approx(0.1, rel=0.03)


def test_firmware_resynchronises_after_garbage_from_host():
    with sim_tester() as t:
        t.link.port.write(b"\x00\x07garbage\xff\xfe" * 20 + b"\x00")
        hello = t.identify()
        assert hello["board"].startswith("sim-")
        assert t.status()["heater"] == 0


def test_probe_finds_glowtrace_on_a_port():
    from glowtrace.tester.ports import probe
    from glowtrace.tester.sim import SimTester, build_scenario
    with SimTester(build_scenario(serial="0777")) as sim:
        hello = probe(sim.path)
    assert hello["board"] == "sim-0777"
    assert probe("/dev/null") is None


def test_a_host_that_stops_reading_cannot_hold_the_heater_on():
    """The host keeps the port open but reads and writes nothing: the
    firmware's writes fill the pty and must not block it with the heater on;
    host silence trips within silence_ms of wall time (TRIP's `ms` is the
    link clock, as in STATUS)."""
    stall_s, silence_ms = 4.0, 2000
    with sim_tester(pace=1.0, light=1) as t:
        seq = t.link.seq
        t.link.send(protocol.CAPTURE, b'{"section": "AB", "silence_ms": %d}' % silence_ms)
        ack = t._await({protocol.REPLY}, 3.0, reply_to=seq)
        assert ack is not None and ack.json()["ok"]
        # the pty fills up within the allowed silence: four channels, the
        # busiest part of the schedule (about 50 kB in the first 2 s)
        time.sleep(stall_s)
        frames = []
        while (f := t.link.receive(0.5)) is not None:
            frames.append(f)
        status = t.status()
    end = [f.json() for f in frames if f.mtype == protocol.CAPTURE_END]
    trip = status["last_trip"]  # the TRIP frame itself may be one of those dropped
    assert trip["cause"] == "host_silent"
    # the trip came during the stall, not after the host read again
    assert status["ms"] - trip["ms"] >= 1000 * stall_s - silence_ms - 1200
    assert status["heater"] == 0
    # frames that could not be written were dropped and counted, so the host
    # sees a gap: the capture can never be taken for a whole one
    assert t.link.stats.lost_frames > 0 or t.link.stats.bad_frames > 0
    assert not end or end[0]["dropped"] > 0


@pytest.mark.parametrize("tube", ["EL34", "12BA6"])
def test_a_capture_ends_when_the_current_has_settled(tube):
    # the slowest heater preset and the fastest: the default end comes after
    # the current is within 1 % of its final value (from a 120 s reference
    # capture of the same heater that cannot end early), within 10 % of that
    from glowtrace import catalogue
    from glowtrace.analysis.analyze import analyze_capture
    from glowtrace.tester.sockets import range_for
    kind = catalogue.load().get(tube)

    def capture(params):
        with sim_tester(tube=tube, seed=7) as t:
            raw = t.capture("T", "A", dict(params, range=range_for(kind, t.hello["frontend"])))
        return raw, analyze_capture(raw, kind)["sections"]["A"]
    _, ref = capture({"max_s": 120, "settle_band": 1e-6})
    raw, own = capture({})
    length = raw.end["off_us"] / 1e6
    assert raw.end["reason"] == "settled"
    assert ref["settle_1pct_s"] <= length <= 1.1 * ref["settle_1pct_s"], \
        (length, ref["settle_1pct_s"])
    assert own["settle_1pct_s"] is not None
    assert not any("too short" in w for w in own["warnings"]), own["warnings"]
