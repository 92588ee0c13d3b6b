# A fake board for firmware unit tests: scripted currents, a clock that only
# moves when sampled, and a byte buffer standing in for the USB link.


class FakeBoard:
    def __init__(self, amps=0.15, short=False, volts=6.3):
        self.channels = ["ia", "ib", "v"]
        self.ranges = ["low", "high"]
        self.board_id = "fake"
        self.reset_cause = "power_on"
        self.frontend = {}
        self.calibration = {}
        self.max_on_s = 300
        self.t = 0
        self.mask = 0
        self.switch_log = []  # (time, mask)
        self.amps = amps
        self.short = short
        self.out = bytearray()
        self.inbox = bytearray()
        self.wall_ms = 0
        self.wall_follows = False  # True: wall clock runs with heater time
        self.active = [0, 1, 2]
        self.active_log = []  # every use_channels call
        self.short_between_chunks_at = None  # a short only the gap's checks can see
        self.checks = []  # times of over_current() calls

    def use_channels(self, names):
        self.active = [self.channels.index(n) for n in names]
        self.active_log.append(list(names))

    def now_us(self):
        return self.t

    def link_ms(self):
        return self.wall_ms

    def heater(self, mask):
        self.mask = mask
        self.switch_log.append((self.t, mask))
        return self.t

    def heater_state(self):
        return self.mask

    def switch_on(self, mask, buf, n, interval, osm, trip_code, current_idx):
        t_on = self.heater(mask)
        return t_on, self.sample(buf, n, t_on, interval, osm, trip_code, current_idx)

    def set_range(self, name):
        self.range = name

    def full_scale_a(self, name):
        return 3.3 if name == "low" else 33.0

    def amps_to_code(self, name, amps):
        return int(amps / self.full_scale_a(name) * 4096)

    def ambient_c(self):
        return 22.0

    def current(self, section):
        if not self.mask & (1 << section):
            return 0.0
        if self.short:
            return 50.0
        return self.amps

    def over_current(self, trip_code, current_idx):
        self.checks.append(self.t)
        at = self.short_between_chunks_at
        if self.mask and at is not None and self.t >= at:
            self.heater(0)
            return True
        return False

    def sample(self, buf, n, t_start, interval, osm, trip_code, current_idx):
        t0 = t_start if t_start > self.t else self.t
        for k in range(n):
            self.t = t0 + k * interval
            if self.wall_follows:
                self.wall_ms = self.t // 1000
            nch = len(self.active)
            for j, c in enumerate(self.active):
                a = self.current(c) if c < 2 else 0.0
                code = min(4095, int(a / 3.3 * 4096)) if c < 2 else 1900
                buf[k * nch + j] = code * osm
                if trip_code and j in current_idx and code > trip_code:
                    self.heater(0)
                    return k + 1, t0, True
        self.t = t0 + n * interval
        return n, t0, False

    def read_input(self):
        data = bytes(self.inbox)
        self.inbox = bytearray()
        return data

    def write(self, data):
        self.out.extend(data)
        return True

    def idle(self, ms):
        pass

    def feed_watchdog(self):
        pass


def frames_out(board):
    from glowfw.frames import Deframer
    d = Deframer(limit=100000)
    return d.feed(board.out)
