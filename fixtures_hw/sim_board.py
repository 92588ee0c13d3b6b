# The simulated tester: a board layer for the MicroPython unix port that the
# real firmware core runs on. It stands in for board_rp2.py: same methods,
# same front-end numbers (schematics/frontend.json), but the heater, the
# supply and the converter are models and the instrument clock is simulated.
#
# Two clocks: now_us() is simulated heater time (captures run faster than
# real time unless paced); link_ms() is the wall clock, because host silence
# is a real-world event and is timed as one.
import json
import math
import random
import select
import sys
import time

from glowfw import frontend
from heater_model import HeaterSection


WRITE_WAIT_MS = 50  # longest wait to write one frame (see write)


class SimReset(BaseException):
    """Raised inside sampling to stand for a watchdog or brown-out reset."""


class SimBoard:
    def __init__(self, scenario, fe, tungsten):
        self.sc = scenario
        self.fe = fe
        self.frontend = fe
        fitted = ("light",) if scenario.get("light") else ()
        self.channels = frontend.channel_names(fe, fitted)
        self.active = list(range(len(self.channels)))
        self.ranges = list(fe["current_ranges"])
        self.board_id = "sim-" + scenario.get("serial", "0001")
        self.reset_cause = scenario.get("reset_cause", "power_on")
        self.state_dir = scenario.get("state_dir")
        # the link's use in the board's own time, for bench/link_bench.py
        self.link_log = open(scenario["link_log"], "a") if scenario.get("link_log") else None
        self.calibration = {"source": "nominal", "gain": 1.0, "offset_codes": 0}
        if self.state_dir:
            try:
                with open(self.state_dir + "/calibration.json") as f:
                    self.calibration = json.load(f)
            except OSError:
                pass
        self.max_on_s = fe["limits"]["max_on_s"]
        self.vref = fe["adc"]["vref_v"]
        self.counts = frontend.counts(fe)
        self.dnl_codes = fe["adc"]["dnl_spike_codes"]
        self.r_path = (fe["current_ranges"]["low"]["shunt_ohm"]
                       + fe["switch"]["rds_on_ohm"])
        self.v_per_v = fe["voltage_divider"]["volts_per_volt"]
        random.seed(scenario.get("seed", 1))
        amb = scenario.get("ambient_c", 22.0)
        self.ambient = amb
        tube = scenario["tube"]
        self.sections = []
        for s in ("a", "b"):
            h = HeaterSection(
                tungsten, tube["section_v"], tube["section_a"],
                hot_cold_ratio=tube.get("hot_cold_ratio", 6.5),
                tau_wire_s=tube.get("tau_wire_s", 0.08),
                tau_sleeve_s=tube.get("tau_sleeve_s", 4.0),
                flash_share=scenario.get("flash_" + s, 0.0),
                tau_flash_s=tube.get("tau_flash_s", 0.12),
                ambient_c=amb,
                wire_over_sleeve_k=tube.get("wire_over_sleeve_k", 150.0))
            h.extra_ohm = scenario.get("contact_ohm", 0.01)
            # a tube switched off a moment ago is still warm: not a cold start
            warm = scenario.get("preheat_k", 0.0)
            h.tw += warm
            h.ts += warm
            h.tx += warm
            self.sections.append(h)
        fault = scenario.get("fault")
        fault_sec = scenario.get("fault_section", "A")
        self.fault = fault
        self.fault_index = 0 if fault_sec == "A" else 1
        if fault in ("open", "short"):
            self.sections[self.fault_index].fault = fault
        load = scenario.get("load_ohm")
        if load:  # a resistor in the socket instead of a tube (calibration, self-test)
            for h in self.sections:
                h.fault = "load"
                h.load_ohm = float(load)
        # a channel whose amplifier or wire is broken reads nothing
        self.broken = scenario.get("broken_channel")
        self.amp_gain_err = scenario.get("amp_gain_error", {"low": 0.004, "high": -0.007})
        self.supply_v = scenario.get("supply_v", tube["section_v"])
        self.source_ohm = scenario.get("source_ohm", 0.02)
        self.gain_err = scenario.get("adc_gain_error", [0.006, -0.012, 0.003, 0.0])
        self.offset = scenario.get("adc_offset_codes", [6.0, 4.0, 3.0, 2.0])
        self.noise = scenario.get("adc_noise_lsb", 1.5)
        self.reset_at_us = scenario.get("reset_at_s", -1) * 1e6
        self.pace = scenario.get("pace", 0)
        self.t_us = 0.0
        self.mask = 0
        self.range = "low"
        self.amps_per_volt = fe["current_ranges"]["low"]["amps_per_volt"]
        self.last_amps = [0.0, 0.0]
        self.v_node = 0.0
        self.wall0 = time.ticks_ms()
        self.idle_ms = time.ticks_ms()
        self.spare = None
        self.stdin = sys.stdin.buffer
        self.stdout = sys.stdout.buffer
        self.poller = select.poll()
        self.poller.register(sys.stdin, select.POLLIN)
        self.out_poller = select.poll()
        self.out_poller.register(sys.stdout, select.POLLOUT)
        self.cut = False  # the last frame was cut short

    # clocks ------------------------------------------------------------
    def now_us(self):
        return int(self.t_us)

    def link_ms(self):
        return time.ticks_ms()

    # switch and ranges -------------------------------------------------
    def heater(self, mask):
        self.mask = mask
        return int(self.t_us)

    def heater_state(self):
        return self.mask

    def switch_on(self, mask, buf, n_sets, interval, oversample, trip_code, current_idx):
        """The heater on, then the dense phase from that instant (the
        simulated converter needs no arming)."""
        t_on = self.heater(mask)
        return t_on, self.sample(buf, n_sets, t_on, interval, oversample, trip_code,
                                 current_idx)

    def set_range(self, name):
        self.range = name
        self.amps_per_volt = self.fe["current_ranges"][name]["amps_per_volt"]

    def full_scale_a(self, name):
        return frontend.full_scale_a(self.fe, name)

    def amps_to_code(self, name, amps):
        return frontend.amps_to_code(self.fe, name, amps)

    def ambient_c(self):
        return round(self.ambient + 0.2 * (random.random() - 0.5), 1)

    # physics -----------------------------------------------------------
    def _solve(self):
        """Currents in both sections and the socket voltage, now."""
        g = []
        for i, h in enumerate(self.sections):
            on = self.mask & (1 << i)
            if self.fault == "intermittent" and i == self.fault_index and on:
                # a worn socket contact: open for 4 ms in every 250 ms
                if (self.t_us % 250000.0) < 4000.0:
                    on = 0
            g.append(1.0 / (h.resistance() + self.r_path) if on else 0.0)
        v = self.supply_v / (1.0 + self.source_ohm * (g[0] + g[1]))
        self.v_node = v
        self.last_amps = [v * g[0], v * g[1]]
        return self.last_amps

    def _advance(self, t_us):
        """Integrate the heaters from the present instant to t_us."""
        dt = (t_us - self.t_us) * 1e-6
        while dt > 0:
            h = dt if dt < 0.002 else 0.002
            amps = self._solve()
            self.sections[0].step(amps[0], h)
            self.sections[1].step(amps[1], h)
            dt -= h
        if t_us > self.t_us:
            self.t_us = t_us

    def _gauss(self):
        if self.spare is not None:
            g, self.spare = self.spare, None
            return g
        u1 = random.random() or 1e-12
        u2 = random.random()
        r = math.sqrt(-2.0 * math.log(u1))
        self.spare = r * math.sin(2.0 * math.pi * u2)
        return r * math.cos(2.0 * math.pi * u2)

    def _code_sum(self, ch, volts, oversample):
        """Sum of `oversample` conversions of one channel: gain and offset
        errors, noise, the RP2040's wide codes (erratum RP2040-E11,
        approximated as a 9-LSB-wide bin at 512, 1536, 2560 and 3584) and
        clipping at the rails."""
        x = volts / self.vref * self.counts * (1.0 + self.gain_err[ch]) + self.offset[ch]
        for c in self.dnl_codes:
            if c - 4.0 <= x < c + 5.0:
                x = float(c)
                break
        top = self.counts - 1
        if x > top:
            x = top
        elif x < 0:
            x = 0.0
        s = int(oversample * x + self.noise * math.sqrt(oversample) * self._gauss() + 0.5)
        hi = top * oversample
        return hi if s > hi else (0 if s < 0 else s)

    # sampling ----------------------------------------------------------
    def use_channels(self, names):
        """Sample only these channels (in the order of `channels`)."""
        self.active = [self.channels.index(n) for n in names]

    def over_current(self, trip_code, current_idx):
        """One conversion of each switched current channel now (between two
        chunks of sets): the heater off and True when one is over trip_code."""
        if not self.mask:
            return False
        amps = self._solve()
        for c in current_idx:
            name = self.channels[self.active[c]]
            if name in ("ia", "ib"):
                a = amps[0 if name == "ia" else 1]
                if self._code_sum(c, a / self.amps_per_volt
                                  * (1.0 + self.amp_gain_err[self.range]), 1) > trip_code:
                    self.mask = 0
                    return True
        return False

    def sample(self, buf, n_sets, t_start, interval, oversample, trip_code, current_idx):
        """Fill buf with n_sets sets of code sums starting at t_start (us),
        one set every interval us. Switches the heater off at once, and
        returns early, when a current channel exceeds trip_code."""
        t0 = t_start if t_start > self.t_us else int(self.t_us)
        chans = [self.channels[c] for c in self.active]
        nch = len(chans)
        trip_sum = trip_code * oversample
        for k in range(n_sets):
            t = t0 + k * interval
            if self.reset_at_us >= 0 and t >= self.reset_at_us:
                self.mask = 0
                raise SimReset()
            if self.fault == "converter" and t >= 100000 and self.mask:
                raise OSError("simulated converter fault")
            self._advance(t)
            amps = self._solve()
            base = k * nch
            tripped = False
            for c in range(nch):
                name = chans[c]
                if name == "ia":
                    v = amps[0] / self.amps_per_volt * (1.0 + self.amp_gain_err[self.range])
                elif name == "ib":
                    v = amps[1] / self.amps_per_volt * (1.0 + self.amp_gain_err[self.range])
                elif name == "v":
                    v = self.v_node / self.v_per_v
                else:
                    # photodiode amplifier: 0.2 V for a section glowing at its
                    # settled level, so a tenfold flash still fits the range
                    v = 0.2 * (self.sections[0].light() * (self.mask & 1)
                               + self.sections[1].light() * ((self.mask >> 1) & 1))
                s = self._code_sum(c, v, oversample) if name != self.broken else 0
                buf[base + c] = s
                if trip_code and c in current_idx and s > trip_sum:
                    tripped = True
            if tripped:
                self.mask = 0
                return k + 1, t0, True
        # the chunk's time is used up when its last set's period ends
        self._advance(t0 + n_sets * interval)
        if self.pace:
            self._pace()
        return n_sets, t0, False

    def _pace(self):
        """Hold simulated time to at most `pace` times wall time."""
        while True:
            wall_us = time.ticks_diff(time.ticks_ms(), self.wall0) * 1000.0
            ahead = self.t_us / self.pace - wall_us
            if ahead <= 0:
                return
            time.sleep_ms(int(ahead / 1000) + 1)

    # link --------------------------------------------------------------
    def read_input(self):
        data = bytearray()
        while len(data) < 512:
            ev = self.poller.poll(0)
            if not ev:
                break
            if ev[0][1] & (select.POLLHUP | select.POLLERR):
                raise SystemExit("host side of the link closed")
            b = self.stdin.read(1)
            if b is None:  # non-blocking (see write): nothing after all
                break
            if not b:
                raise SystemExit("link closed")
            data.extend(b)
        return bytes(data)

    def write(self, data):
        """Write a frame within WRITE_WAIT_MS, or drop what is left of it.
        The host makes the pty non-blocking (tester/sim.py), so a host that
        stops reading fills the pty and write() returns short instead of
        holding the firmware with the heater on. After a cut frame a 0x00
        goes first, so the host's decoder resynchronises at once."""
        if self.cut:
            data = b"\x00" + data
        if self.link_log:
            self.link_log.write("%d %d\n" % (int(self.t_us), len(data)))
            self.link_log.flush()
        mv = memoryview(data)
        deadline = time.ticks_add(time.ticks_ms(), WRITE_WAIT_MS)
        while len(mv):
            try:
                n = self.stdout.write(mv)
            except OSError:  # EAGAIN on some ports instead of None
                n = None
            if n:
                mv = mv[n:]
                continue
            left = time.ticks_diff(deadline, time.ticks_ms())
            if left <= 0:
                if len(mv) < len(data):  # part of it went: a delimiter is owed
                    self.cut = True
                return False
            self.out_poller.poll(left)
        self.cut = False
        return True

    def idle(self, ms):
        """Wait for input; the heater is off, so simulated time follows the
        wall clock (a heater cools between captures as it would)."""
        ev = self.poller.poll(ms)
        if ev and ev[0][1] & (select.POLLHUP | select.POLLERR) and not ev[0][1] & select.POLLIN:
            raise SystemExit("host side of the link closed")
        now = time.ticks_ms()
        self._advance(self.t_us + 1000.0 * time.ticks_diff(now, self.idle_ms))
        self.idle_ms = now

    def feed_watchdog(self):
        pass

    def save_calibration(self, cal):
        self.calibration = cal
        if self.state_dir:
            with open(self.state_dir + "/calibration.json", "w") as f:
                json.dump(cal, f)

    def enter_repl(self):
        # the simulated board has no REPL to go to: the firmware stops
        raise SystemExit("firmware stopped at the host's request")
