"""Finding testers: serial ports, MicroPython rp2 boards among them, and which
of those answer as glowtrace firmware."""

from serial.tools import list_ports

from ..errors import GlowtraceError, LinkError
from .driver import connect

RP2_MICROPYTHON = (0x2E8A, 0x0005)  # USB VID:PID of MicroPython on RP2040/RP2350


def probe(device: str, timeout: float = 1.5) -> dict | None:
    """The tester's handshake on this port, or None if nothing answers."""
    try:
        with connect(device, timeout=timeout, tries=2) as tester:
            return tester.hello
    except GlowtraceError:
        return None


def scan(probe_boards: bool = True) -> list[dict]:
    out = []
    for p in sorted(list_ports.comports(), key=lambda p: p.device):
        is_rp2 = (p.vid, p.pid) == RP2_MICROPYTHON
        hello = probe(p.device) if (probe_boards and is_rp2) else None
        out.append({
            "device": p.device, "description": p.description,
            "usb_id": f"{p.vid:04X}:{p.pid:04X}" if p.vid is not None else None,
            "serial_number": p.serial_number, "micropython_rp2": is_rp2,
            "glowtrace": bool(hello),
            "firmware": hello.get("firmware") if hello else None,
            "board": hello.get("board") if hello else None,
        })
    return out


def find_testers() -> list[str]:
    """Every glowtrace tester plugged in (a bench session runs them side by
    side), or a clear error when there is none."""
    found = [p["device"] for p in scan() if p["glowtrace"]]
    if not found:
        raise LinkError("no glowtrace tester found on USB: plug them in, or give --port "
                        "for each (a device, or glowsim:// for the simulated tester)")
    return found


def find_tester() -> str:
    """The one glowtrace tester plugged in, or a clear error."""
    found = [p["device"] for p in scan() if p["glowtrace"]]
    if len(found) == 1:
        return found[0]
    if not found:
        raise LinkError("no glowtrace tester found on USB: plug one in, or give "
                        "--port (a device, or glowsim:// for the simulated tester)")
    raise LinkError("more than one tester found (" + ", ".join(found) + "): choose with --port")
