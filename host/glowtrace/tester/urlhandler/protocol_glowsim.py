"""pyserial URL scheme glowsim://?tube=12AX7&flash_b=0.1 : the simulated tester.

Opening the URL starts the firmware in a `micropython` process on a pty and
opens the pty like any serial port; closing it stops the process."""

from urllib.parse import urlsplit

import serial
from serial.serialposix import Serial as PosixSerial

from ...errors import GlowtraceError
from ..sim import SimTester, build_scenario, parse_settings


class Serial(PosixSerial):
    def open(self):
        if self._port is None:
            raise serial.SerialException("port must be configured before it can be used")
        url = self._port
        parts = urlsplit(url)
        if parts.scheme != "glowsim":
            raise serial.SerialException(f"not a glowsim:// URL: {url}")
        try:
            scenario = build_scenario(**parse_settings(parts.query))
        except GlowtraceError as e:
            raise serial.SerialException(str(e)) from None
        self.sim = SimTester(scenario)
        # PosixSerial opens self.portstr: point it at the pty for the open
        self.portstr = self.sim.start()
        try:
            super().open()
        except Exception:
            self.sim.stop()
            raise
        finally:
            self.portstr = url

    def close(self):
        try:
            super().close()
        finally:
            sim = getattr(self, "sim", None)
            if sim is not None:
                sim.stop()
