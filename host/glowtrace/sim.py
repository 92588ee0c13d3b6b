"""Start the simulated tester: the real firmware in a `micropython` process
whose stdin/stdout is the master side of a pseudo-terminal. The host opens
the slave side (/dev/pts/N) with pyserial exactly like a board's USB port."""

import json
import os
import pty
import subprocess
import tempfile
import tty
from urllib.parse import parse_qsl, urlencode, urlsplit

from . import paths
from .errors import GlowtraceError

# scenario keys a user may set, and how to read them from text
SCENARIO_KEYS = {
    "tube": str, "serial": str, "ambient_c": float, "flash_a": float, "flash_b": float,
    "fault": str, "fault_section": str, "supply_v": float, "source_ohm": float,
    "contact_ohm": float, "preheat_k": float, "reset_at_s": float, "pace": float,
    "light": int, "seed": int, "adc_noise_lsb": float, "load_ohm": float,
    "broken_channel": str, "state_dir": str,
}
# settings that override the tube preset's heater (per section)
HEATER_KEYS = {"section_v": float, "section_a": float, "hot_cold_ratio": float,
               "tau_wire_s": float, "tau_sleeve_s": float, "tau_flash_s": float}
SCENARIO_KEYS.update(HEATER_KEYS)
FAULTS = ("open", "short", "intermittent", "converter")


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
    unknown = set(settings) - set(SCENARIO_KEYS)
    if unknown:
        raise GlowtraceError(f"unknown simulator setting(s): {', '.join(sorted(unknown))}")
    if settings.get("fault") not in (None, *FAULTS):
        raise GlowtraceError(f"fault must be one of {', '.join(FAULTS)}")
    if settings.get("broken_channel") not in (None, "ia", "ib", "v"):
        raise GlowtraceError("broken_channel must be ia, ib or v")
    scenario = {k: v for k, v in settings.items() if k != "tube" and k not in HEATER_KEYS}
    tube = dict(presets[name], name=name)
    tube.update({k: v for k, v in settings.items() if k in HEATER_KEYS})
    if tube["section_v"] <= 0 or tube["section_a"] <= 0 or tube["hot_cold_ratio"] <= 1:
        raise GlowtraceError("section_v and section_a must be positive and "
                             "hot_cold_ratio above 1")
    scenario["tube"] = tube
    scenario["frontend_path"] = str(paths.require(paths.FRONTEND_PATH))
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
        if key not in SCENARIO_KEYS:
            raise GlowtraceError(f"unknown simulator setting {key!r}; known: "
                                 + ", ".join(sorted(SCENARIO_KEYS)))
        try:
            out[key] = SCENARIO_KEYS[key](value)
        except ValueError:
            raise GlowtraceError(f"bad value for {key}: {value!r}") from None
    return out


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
        if "state_dir" not in self.scenario:
            # the board's flash (its calibration file) for this run only
            self._state = tempfile.TemporaryDirectory(prefix="glowsim-state-")
            self.scenario = dict(self.scenario, state_dir=self._state.name)
        master, slave = pty.openpty()
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
