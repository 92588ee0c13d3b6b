# Entry point of the simulated tester: `micropython sim_main.py SCENARIO.json`
# with MICROPYPATH holding firmware/ and fixtures_hw/. stdin/stdout are the
# link. A simulated reset restarts the firmware as a board would reboot.
# The scenario comes in a file, not as JSON text on the command line: the
# PyPI micropython wrapper crashes on an argument of 256 characters or more.
import json
import sys

from glowfw import app, frontend
from sim_board import SimBoard, SimReset
from tungsten import Tungsten


def main():
    with open(sys.argv[1]) as f:
        scenario = json.load(f)
    fe = frontend.load(scenario["frontend_path"])
    tungsten = Tungsten(scenario["tungsten_path"])
    board = SimBoard(scenario, fe, tungsten)
    while True:
        try:
            app.main(board)
        except SimReset:
            # the gate pull-down holds the heater off through a reset
            board.mask = 0
            board.reset_cause = "watchdog"
            board.reset_at_us = -1


main()
