# Runs at boot on the tester. The gate pull-downs keep the heater off while
# the board is in reset; the first thing this does is drive the gates low.
# Then, unless the host asked for the REPL before this reboot (the flag file
# board_rp2.REPL_FLAG), a 1.5 s window in which Ctrl-C still reaches the REPL,
# and the firmware: a binary link and a running watchdog.
import os
import time

from glowfw import frontend

import board_rp2

board_rp2.heater_pins(frontend.load("/frontend.json"))
try:
    os.remove(board_rp2.REPL_FLAG)
    stay_at_repl = True
except OSError:
    stay_at_repl = False

if not stay_at_repl:
    time.sleep_ms(1500)
    from glowfw import app  # noqa: E402

    app.main(board_rp2.Rp2Board())
