# The safety supervisor: decides when the heater must go off and why.
# It never touches hardware itself; capture.py switches off through the board
# as soon as check() names a cause. The board also trips on over-current by
# itself, set by set, because that cannot wait for a block to finish.
import time

OVER_CURRENT = "over_current"
OPEN_HEATER = "open_heater"
MAX_ON_TIME = "max_on_time"
HOST_SILENT = "host_silent"
EXCEPTION = "exception"

OPEN_CHECK_US = 20000  # an intact heater draws current 20 ms after switch-on


class Supervisor:
    def __init__(self, board):
        self.board = board
        self.last_host_ms = board.link_ms()
        self.silence_ms = 2000
        self.max_on_us = 300000000
        self.open_code = 0
        self.open_checked = False

    def heard_host(self):
        self.last_host_ms = self.board.link_ms()

    def arm(self, silence_ms, max_on_us, open_code):
        """Set limits for one capture. open_code: per-conversion current code
        (offset included) below which a switched section counts as open."""
        self.silence_ms = silence_ms
        self.max_on_us = max_on_us
        self.open_code = open_code
        self.open_checked = False
        self.heard_host()

    def host_silent(self):
        return time.ticks_diff(self.board.link_ms(), self.last_host_ms) > self.silence_ms

    def check(self, t_us, min_section_mean, board_tripped):
        """Cause to switch off after a block ending at t_us from switch-on,
        or None. min_section_mean: lowest mean current code per conversion
        among the switched sections over the block."""
        if board_tripped:
            return OVER_CURRENT
        if not self.open_checked and t_us >= OPEN_CHECK_US:
            self.open_checked = True
            if min_section_mean < self.open_code:
                return OPEN_HEATER
        if t_us > self.max_on_us:
            return MAX_ON_TIME
        if self.host_silent():
            return HOST_SILENT
        return None
