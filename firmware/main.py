# Runs at boot on the tester. The gate pull-downs keep the heater off while
# the board is in reset; the first thing this does is drive the gates low.
# Then, unless the host asked for the REPL before this reboot (the flag file
# board_rp2.REPL_FLAG), a 1.5 s window for a REPL tool, and the firmware: a
# binary link and a running watchdog.
#
# The window does not use Ctrl-C as a KeyboardInterrupt: a glowtrace host
# probing the port while the board boots would then stop the firmware by
# chance, whenever its frame held a 0x03 byte (an emulated board's first
# test found it). A glowtrace host's first byte is a frame delimiter (0x00);
# a REPL tool (mpremote) sends Ctrl-C (0x03) with no 0x00 before it. So:
# 0x03 first -> stay at the REPL; 0x00 first -> start the firmware at once.
import os
import select
import sys
import time

import micropython
from glowfw import frontend

import board_rp2

BOOT_WINDOW_MS = 1500

board_rp2.heater_pins(frontend.load("/frontend.json"))
try:
    os.remove(board_rp2.REPL_FLAG)
    stay_at_repl = True
except OSError:
    stay_at_repl = False


def _repl_asked():
    """Read the link for the boot window: True when a REPL tool's Ctrl-C
    came before any glowtrace frame delimiter."""
    micropython.kbd_intr(-1)
    poller = select.poll()
    poller.register(sys.stdin, select.POLLIN)
    end = time.ticks_add(time.ticks_ms(), BOOT_WINDOW_MS)
    try:
        while time.ticks_diff(end, time.ticks_ms()) > 0:
            if poller.poll(20):
                b = sys.stdin.buffer.read(1)
                if b == b"\x00":
                    return False
                if b == b"\x03":
                    return True
        return False
    finally:
        micropython.kbd_intr(3)


if not stay_at_repl and not _repl_asked():
    from glowfw import app  # noqa: E402

    app.main(board_rp2.Rp2Board())
