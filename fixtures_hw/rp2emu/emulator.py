"""The emulated tester: the real MicroPython rp2 port on an emulated RP2040
(rp2040js under node, runner.mjs here), with a serial port that pyserial and
mpremote open like /dev/ttyACM0 (a pty bridged to the runner's USB CDC
socket) and the runner's control port (ADC values, GPIO events in emulated
time, reset).

    with Rp2Emulator(flash=path) as emu:
        emu.port                      # the serial device
        emu.command("adc 0 2048")     # a control command and its reply
        emu.gpio_events(14)           # [(t_us, state), ...] of a pin

CPython only: this is test equipment beside the firmware, not firmware.
`missing()` says what is not there (node, the npm packages, the bundle)."""

import os
import pty
import queue
import select
import shutil
import socket
import subprocess
import threading
import time
import tty
from pathlib import Path

HERE = Path(__file__).resolve().parent
RUNNER = HERE / "runner.mjs"
UF2 = "micropython-1.26.1-rp2-pico.uf2"


def bundle_dir() -> Path:
    """The MicroPython-for-RP2040 bundle: $GLOWTRACE_RP2EMU, else
    ../shared/rp2emu beside the checkout."""
    return Path(os.environ.get("GLOWTRACE_RP2EMU") or HERE.parents[2] / "shared" / "rp2emu")


def missing() -> str | None:
    """What the emulated tester lacks here, in one line, or None."""
    b = bundle_dir()
    if not (b / UF2).is_file() or not (b / "bootrom.mjs").is_file():
        return f"no rp2emu bundle at {b} (set GLOWTRACE_RP2EMU)"
    if not shutil.which("node"):
        return "node is not installed"
    if not (HERE / "node_modules" / "rp2040js").is_dir():
        return f"rp2040js is not installed: run `npm ci` in {HERE}"
    return None


def _free_port_pair() -> int:
    """A port p with p + 1 free too (the runner's serial and control)."""
    for _ in range(50):
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            p = s.getsockname()[1]
        try:
            with socket.socket() as s:
                s.bind(("127.0.0.1", p + 1))
            return p
        except OSError:
            continue
    raise RuntimeError("no free pair of ports for the emulator")


def _connect(port: int, deadline: float) -> socket.socket:
    while True:
        try:
            return socket.create_connection(("127.0.0.1", port), timeout=2.0)
        except OSError:
            if time.monotonic() > deadline:
                raise
            time.sleep(0.1)


class Rp2Emulator:
    def __init__(self, flash: Path, log: Path | None = None, start_timeout_s: float = 60.0):
        self.flash = Path(flash)
        self.log_path = Path(log) if log else self.flash.with_suffix(".log")
        self.start_timeout_s = start_timeout_s
        self.events: list[str] = []
        self._replies: queue.Queue = queue.Queue()
        self._stop = threading.Event()

    # life -----------------------------------------------------------------
    def __enter__(self):
        why = missing()
        if why:
            raise RuntimeError(why)
        p = _free_port_pair()
        self._log = open(self.log_path, "ab")
        self.proc = subprocess.Popen(
            ["node", str(RUNNER), "--bundle", str(bundle_dir()), "--flash-file",
             str(self.flash), "--port", str(p), "--gpio-log"],
            stdout=self._log, stderr=subprocess.STDOUT, cwd=HERE)
        deadline = time.monotonic() + self.start_timeout_s
        try:
            self._serial = _connect(p, deadline)
            self._ctl = _connect(p + 1, deadline)
        except OSError:
            self.__exit__(None, None, None)
            raise RuntimeError(f"the emulator did not start: see {self.log_path}") from None
        self._serial.settimeout(None)
        self._ctl.settimeout(None)
        self._master, slave = pty.openpty()
        tty.setraw(slave)
        self.port = os.ttyname(slave)
        self._slave = slave  # kept open: the pty lives while we do
        self._threads = [threading.Thread(target=self._bridge, daemon=True),
                         threading.Thread(target=self._control_reader, daemon=True)]
        for t in self._threads:
            t.start()
        return self

    def __exit__(self, *exc):
        self._stop.set()
        proc = getattr(self, "proc", None)
        if proc and proc.poll() is None:
            proc.terminate()
            try:
                proc.wait(5)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()
        for name in ("_serial", "_ctl"):
            s = getattr(self, name, None)
            if s is not None:
                s.close()
        for fd in (getattr(self, "_master", None), getattr(self, "_slave", None)):
            if fd is not None:
                try:
                    os.close(fd)
                except OSError:
                    pass
        if getattr(self, "_log", None):
            self._log.close()

    # the serial bridge (what socat does) ---------------------------------
    def _bridge(self):
        sock, master = self._serial, self._master
        while not self._stop.is_set():
            try:
                ready, _, _ = select.select([sock, master], [], [], 0.2)
                if sock in ready:
                    data = sock.recv(65536)
                    if not data:
                        return
                    os.write(master, data)
                if master in ready:
                    sock.sendall(os.read(master, 65536))
            except OSError:
                return

    # the control port ----------------------------------------------------
    def _control_reader(self):
        buf = b""
        while not self._stop.is_set():
            try:
                data = self._ctl.recv(65536)
            except OSError:
                return
            if not data:
                return
            buf += data
            while b"\n" in buf:
                line, buf = buf.split(b"\n", 1)
                text = line.decode(errors="replace").strip()
                if text.startswith("event "):
                    self.events.append(text[6:])
                elif text:
                    self._replies.put(text)

    def command(self, line: str, timeout: float = 30.0) -> str:
        """A control command (runner.mjs lists them) and its one-line reply."""
        while not self._replies.empty():
            self._replies.get_nowait()
        self._ctl.sendall(line.encode() + b"\n")
        return self._replies.get(timeout=timeout)

    def gpio_events(self, pin: int, since: int = 0) -> list[tuple[int, str]]:
        """(emulated time in us, state) of every change of a pin, in order,
        from event number `since` on (len(emu.events) taken earlier)."""
        out = []
        for e in list(self.events)[since:]:
            parts = e.split()
            if len(parts) >= 3 and parts[0] == "gpio" and parts[1] == str(pin):
                t = next(int(p[5:]) for p in parts if p.startswith("t_us="))
                out.append((t, parts[2]))
        return out

    def resets(self) -> int:
        """Watchdog resets seen so far."""
        return sum(1 for e in self.events if e.startswith("watchdog-reset"))

    def watchdog_resets_us(self) -> list[int]:
        """Emulated times (us) of the watchdog's resets."""
        return [int(e.split("t_us=")[1]) for e in list(self.events)
                if e.startswith("watchdog-reset")]

    def emulated_s(self) -> float:
        reply = self.command("stats")
        return float(reply.split("emu_s=")[1].split()[0])
