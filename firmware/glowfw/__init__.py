# glowtrace firmware: hardware-independent core.
# The board layer (board_rp2.py on the board, fixtures_hw/sim_board.py in the
# simulated tester) is the only code that touches hardware.
VERSION = "0.1.0"
