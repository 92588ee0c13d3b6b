"""Opening ports: real boards by device path, the simulated tester by URL."""

import serial

from ..errors import LinkError

if "glowtrace.tester.urlhandler" not in serial.protocol_handler_packages:
    serial.protocol_handler_packages.append("glowtrace.tester.urlhandler")


def open_port(url: str, timeout: float = 0.1) -> serial.SerialBase:
    try:
        return serial.serial_for_url(url, baudrate=115200, timeout=timeout)
    except (serial.SerialException, OSError, ValueError) as e:
        raise LinkError(f"cannot open {url}: {e}") from None
