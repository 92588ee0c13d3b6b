"""Start the simulated tester: the real firmware in a `micropython` process
whose stdin/stdout is the master side of a pseudo-terminal. The host opens
the slave side (/dev/pts/N) with pyserial exactly like a board's USB port."""

import json
import os
import pty
import subprocess
import tempfile
import tty
from dataclasses import dataclass
from urllib.parse import parse_qsl, urlencode, urlsplit

from .. import paths
from ..errors import GlowtraceError

FAULTS = ("open", "short", "intermittent", "converter")


@dataclass(frozen=True)
class Setting:
    """One simulator setting: its type, its help text, its allowed values;
    heater settings override the tube preset's heater (per section)."""
    kind: type
    help: str
    choices: tuple = ()
    heater: bool = False


# Every setting of the simulated tester, in one place: the glowsim:// URL query,
# `glowtrace sim` options and their help are all made from this table.
SETTINGS = {
    "tube": Setting(str, "heater preset (default 12AX7)"),
    "serial": Setting(str, "board serial: part of its id, and the name its flash "
                           "(calibration) is kept under"),
    "ambient_c": Setting(float, "room temperature, C"),
    "flash_a": Setting(float, "share of section A that heats without the sleeve and "
                              "flashes (0-0.3)"),
    "flash_b": Setting(float, "share of section B that flashes (0-0.3)"),
    "light": Setting(bool, "fit the photodiode channel"),
    "supply_v": Setting(float, "heater supply voltage, V"),
    "source_ohm": Setting(float, "supply source resistance, ohm (a supply that sags)"),
    "contact_ohm": Setting(float, "socket contact resistance, ohm"),
    "preheat_k": Setting(float, "the heater starts this many K above room (not yet cold)"),
    "fault": Setting(str, "a fault: open or short heater, intermittent contact, or the "
                          "converter failing 0.1 s after switch-on", FAULTS),
    "fault_section": Setting(str, "the section with the fault", ("A", "B")),
    "reset_at_s": Setting(float, "the board resets at this heater time, s"),
    "load_ohm": Setting(float, "a resistor in the socket instead of a tube, ohm"),
    "broken_channel": Setting(str, "a broken converter channel", ("ia", "ib", "v")),
    "adc_noise_lsb": Setting(float, "converter noise, LSB rms"),
    "pace": Setting(float, "simulated seconds per wall second (0, the default: flat out)"),
    "seed": Setting(int, "noise seed"),
    "variant": Setting(str, "the tester's variant: 30V (heaters to 30 V) or 55V "
                            "(series-string heaters to 55 V)", ("30V", "55V")),
    "link_log": Setting(str, "file to which the board appends, per write to the link, its "
                             "clock (us) and the bytes (the link benchmark reads it)"),
    "state_dir": Setting(str, "folder for the board's flash (default: per serial, under "
                              "the data directory's sim/)"),
    "section_v": Setting(float, "rated heater volts per section", heater=True),
    "section_a": Setting(float, "rated heater amps per section", heater=True),
    "hot_cold_ratio": Setting(float, "hot over cold resistance", heater=True),
    "tau_wire_s": Setting(float, "heater wire time constant, s", heater=True),
    "tau_sleeve_s": Setting(float, "cathode sleeve time constant, s", heater=True),
    "tau_flash_s": Setting(float, "flashing share's time constant, s", heater=True),
}
HEATER_KEYS = {k for k, s in SETTINGS.items() if s.heater}
DEFAULT_SERIAL = "0001"  # the simulated board's serial when none is given


def tube_presets() -> dict:
    with open(paths.require(paths.FIXTURES_DIR / "sim_tubes.json")) as f:
        data = json.load(f)
    return {k: v for k, v in data.items() if not k.startswith("_")}


def build_scenario(**settings) -> dict:
    """A complete scenario for sim_main.py from user settings."""
    presets = tube_presets()
    name = settings.get("tube", "12AX7")
    if name not in presets:
        raise GlowtraceError(f"the simulator has no tube {name!r}; it knows "
                             + ", ".join(sorted(presets)))
    unknown = set(settings) - set(SETTINGS)
    if unknown:
        raise GlowtraceError(f"unknown simulator setting(s): {', '.join(sorted(unknown))}")
    for key, value in settings.items():
        allowed = SETTINGS[key].choices
        if allowed and value not in allowed:
            raise GlowtraceError(f"{key} must be one of {', '.join(allowed)}")
    scenario = {k: v for k, v in settings.items()
                if k not in ("tube", "variant") and k not in HEATER_KEYS}
    if scenario.get("light") is not None:
        scenario["light"] = int(scenario["light"])
    # the board's flash (its calibration) lives on between runs, per serial,
    # as a real board's does
    scenario.setdefault("state_dir", str(paths.sim_state_dir(
        settings.get("serial") or DEFAULT_SERIAL)))
    tube = dict(presets[name], name=name)
    tube.update({k: v for k, v in settings.items() if k in HEATER_KEYS})
    if tube["section_v"] <= 0 or tube["section_a"] <= 0 or tube["hot_cold_ratio"] <= 1:
        raise GlowtraceError("section_v and section_a must be positive and "
                             "hot_cold_ratio above 1")
    scenario["tube"] = tube
    scenario["frontend_path"] = str(paths.require(
        paths.FRONTEND_VARIANTS[settings.get("variant") or "30V"]))
    scenario["tungsten_path"] = str(paths.require(paths.TUNGSTEN_PATH))
    return scenario


def with_load(url: str, load_ohm: float | None) -> str:
    """The same glowsim:// URL with a resistor in the simulated socket (None:
    the socket empty), the fixture of a calibration or self-test step."""
    parts = urlsplit(url)
    q = dict(parse_qsl(parts.query))
    q["load_ohm"] = str(load_ohm if load_ohm is not None else 1e9)
    return "glowsim://?" + urlencode(q)


def parse_settings(query: str) -> dict:
    """Settings from a URL query such as tube=12AX7&flash_b=0.1."""
    out = {}
    for key, value in parse_qsl(query, keep_blank_values=True):
        if key not in SETTINGS:
            raise GlowtraceError(f"unknown simulator setting {key!r}; known: "
                                 + ", ".join(sorted(SETTINGS)))
        try:
            out[key] = _parse_value(SETTINGS[key].kind, value)
        except ValueError:
            raise GlowtraceError(f"bad value for {key}: {value!r}") from None
    return out


def _parse_value(kind: type, text: str):
    if kind is bool:
        if text.lower() not in ("1", "0", "true", "false", "yes", "no"):
            raise ValueError(text)
        return text.lower() in ("1", "true", "yes")
    return kind(text)


class SimTester:
    """A running simulated tester. Use as a context manager or call stop()."""

    def __init__(self, scenario: dict):
        self.scenario = scenario
        self.proc = None
        self.path = None
        self._hold_fd = None
        self.log = None
        self.scenario_file = None
        self._state = None

    def start(self) -> str:
        if self.scenario.get("state_dir"):
            os.makedirs(self.scenario["state_dir"], exist_ok=True)
        else:
            # the board's flash (its calibration file) for this run only
            self._state = tempfile.TemporaryDirectory(prefix="glowsim-state-")
            self.scenario = dict(self.scenario, state_dir=self._state.name)
        master, slave = pty.openpty()
        # non-blocking for the simulated board too (it shares this open
        # file): its writes return short when the host stops reading, as a
        # board's bounded USB write gives up, instead of blocking forever
        os.set_blocking(master, False)
        # raw before anyone writes: no echo, no CR/LF translation, no signals
        tty.setraw(slave)
        self.path = os.ttyname(slave)
        env = dict(os.environ)
        env["MICROPYPATH"] = os.pathsep.join(
            [str(paths.require(paths.FIRMWARE_DIR)), str(paths.FIXTURES_DIR)])
        self.log = tempfile.TemporaryFile()
        self.scenario_file = tempfile.NamedTemporaryFile(
            "w", prefix="glowsim-", suffix=".json")
        json.dump(self.scenario, self.scenario_file)
        self.scenario_file.flush()
        self.proc = subprocess.Popen(
            [paths.micropython_executable(), str(paths.FIXTURES_DIR / "sim_main.py"),
             self.scenario_file.name],
            stdin=master, stdout=master, stderr=self.log, env=env, close_fds=True,
            # its own session: Ctrl-C in the terminal goes to the host, which
            # then tells the tester to switch off, as with a real board
            start_new_session=True)
        os.close(master)
        # keep one slave descriptor so the pty does not hang up between
        # openers (a real USB port stays present while the board is plugged)
        self._hold_fd = slave
        return self.path

    def stderr_text(self) -> str:
        if self.log is None:
            return ""
        self.log.seek(0)
        return self.log.read().decode(errors="replace")

    def alive(self) -> bool:
        return self.proc is not None and self.proc.poll() is None

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            try:
                self.proc.wait(3)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait()
        if self._hold_fd is not None:
            os.close(self._hold_fd)
            self._hold_fd = None
        if self.scenario_file is not None:
            self.scenario_file.close()
            self.scenario_file = None

    def __enter__(self):
        self.start()
        return self

    def __exit__(self, *exc):
        self.stop()
