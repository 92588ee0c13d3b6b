# Runs at boot on the tester. The gate pull-downs keep the heater off while
# the board is in reset; the first thing this does is drive the gates low.
# A 1.5 s window follows in which Ctrl-C reaches the REPL (mpremote uses it
# to install firmware); after that the link is binary and the watchdog runs.
import time

from glowfw import frontend

import board_rp2

board_rp2.heater_pins(frontend.load("/frontend.json"))
time.sleep_ms(1500)

from glowfw import app  # noqa: E402

app.main(board_rp2.Rp2Board())
