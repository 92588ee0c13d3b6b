# Board layer for the RP2040 / RP2350 reference tester (schematics/).
# The only firmware module that touches hardware. Pins and front-end numbers
# come from frontend.json on the board's flash (a copy of
# schematics/frontend.json), so firmware, simulator and host agree.
#
# Every phase: the ADC free-runs in round-robin over the channels in use,
# paced by its own clock divider, and DMA moves each conversion to RAM, so
# neither USB traffic nor the interpreter's speed can skew the timing; the CPU
# watches DMA progress and switches off on over-current within a few sets.
# An oversampled set's conversions are spread evenly over its interval and
# summed once the transfer is done. (Sampling paced by ticks_us in Python
# could not keep up: on the emulated chip, 8 conversions of 2 channels every
# 250 us ran late, and the sets were stamped with times they were not taken
# at. It is left for intervals the divider cannot reach.)
import array
import json
import select
import sys
import time

import machine
import micropython
import rp2
from micropython import const

from glowfw import frontend

_RP2350 = "RP2350" in sys.implementation._machine
_ADC_BASE = const(0x400A0000) if _RP2350 else const(0x4004C000)
_ADC_CS = _ADC_BASE
_ADC_FCS = _ADC_BASE + 0x08
_ADC_RESULT = _ADC_BASE + 0x04
_ADC_FIFO = _ADC_BASE + 0x0C
_ADC_DIV = _ADC_BASE + 0x10
# DREQ numbers from the RP2040 and RP2350 datasheets (DMA chapter); the
# RP2350 value is from memory and is checked on the first RP2350 build
_DREQ_ADC = 48 if _RP2350 else 36
_ADC_CLOCK_HZ = const(48000000)
# the watchdog: a hang leaves the heater on until it fires, so it is short;
# the longest stretch without a feed is the capture's end (every held block
# to a host that does not read: about 1 s at 50 ms a frame)
_WDT_MS = const(3000)
_STALL_MARGIN_US = const(2000)
_ONE_CONVERSION_MAX_US = const(200)  # a conversion takes 2 us  # a DMA transfer this much past its time has stalled
_WRITE_WAIT_MS = const(50)  # longest wait to hand one frame to USB
_FE_PATH = "/frontend.json"
_CAL_PATH = "/calibration.json"
REPL_FLAG = "/glowtrace_repl"

# the ADC divider is 16 bits of integer: at most 65536 / 48 MHz between conversions
_MAX_CONVERSION_US = const(1300)


@micropython.native
def _sum_sets(raw, buf, n_sets, oversample, nch):
    """buf[k * nch + c] = the sum of set k's oversample conversions of channel
    c, from raw in round-robin order ((k * oversample + r) * nch + c)."""
    for k in range(n_sets):
        base = k * oversample * nch
        for c in range(nch):
            s = 0
            i = base + c
            for _ in range(oversample):
                s += raw[i]
                i += nch
            buf[k * nch + c] = s


@micropython.viper
def _any_over(raw, first: int, end: int, nch: int, c: int, code: int) -> bool:
    """Whether channel c exceeds code in conversion rounds first..end-1.
    Compiled (viper): checked round by round in Python, the watch fell behind
    the dense phase's 16 us rounds on the emulated RP2040, and a short at
    3 ms was switched off at 8 ms."""
    p = ptr16(raw)
    i = first * nch + c
    stop = end * nch
    while i < stop:
        if p[i] > code:
            return True
        i += nch
    return False


_RESET_NAMES = {}
for _n in ("PWRON_RESET", "WDT_RESET", "HARD_RESET", "SOFT_RESET", "DEEPSLEEP_RESET"):
    if hasattr(machine, _n):
        _RESET_NAMES[getattr(machine, _n)] = _n.lower()


def heater_pins(fe):
    """Both switch gates driven low. Called first thing at boot."""
    g = fe["gpio"]
    return (machine.Pin(g["switch_a"], machine.Pin.OUT, value=0),
            machine.Pin(g["switch_b"], machine.Pin.OUT, value=0))


class Rp2Board:
    def __init__(self, fitted_optional=()):
        fe = frontend.load(_FE_PATH)
        self.fe = fe
        self.frontend = fe
        self.switch = heater_pins(fe)
        self._gates = (self.switch[0].value, self.switch[1].value)
        self.mask = 0
        self.range_pin = machine.Pin(fe["gpio"]["range_high"], machine.Pin.OUT, value=0)
        self.channels = frontend.channel_names(fe, fitted_optional)
        self.inputs = [c["adc_input"] for c in fe["channels"] if c["name"] in self.channels]
        self.adcs = [machine.ADC(i) for i in self.inputs]
        self.active = list(range(len(self.channels)))
        self._raw = array.array("H")  # conversions of oversampled sets, before summing
        self._on_mask = 0  # gates switch_on() closes once the converter runs
        self._t_on = None
        self.temp_adc = machine.ADC(4)
        self.ranges = list(fe["current_ranges"])
        self.board_id = "rp2-" + "".join("%02x" % b for b in machine.unique_id())
        self.reset_cause = _RESET_NAMES.get(machine.reset_cause(), "unknown")
        self.max_on_s = fe["limits"]["max_on_s"]
        self.calibration = {"source": "nominal", "gain": 1.0, "offset_codes": 0}
        try:
            with open(_CAL_PATH) as f:
                self.calibration = json.load(f)
        except OSError:
            pass
        self.stdin = sys.stdin.buffer
        self.stdout = sys.stdout.buffer
        self.poller = select.poll()
        self.poller.register(sys.stdin, select.POLLIN)
        self.out_poller = select.poll()
        self.out_poller.register(sys.stdout, select.POLLOUT)
        micropython.kbd_intr(-1)  # 0x03 in binary frames must not interrupt
        self.wdt = machine.WDT(timeout=_WDT_MS)

    # clocks
    def now_us(self):
        return time.ticks_us()

    def link_ms(self):
        return time.ticks_ms()

    # switch and ranges
    def heater(self, mask):
        # the time of the switching, read just before the gate writes (bound
        # methods ready, nothing in between): read after them it was about
        # 50 us late on the emulated RP2040, and every set was stamped that
        # much early against the heater's switch-on
        gate_a, gate_b = self._gates
        t = time.ticks_us()
        gate_a(mask & 1)
        gate_b((mask >> 1) & 1)
        self.mask = mask
        return t

    def heater_state(self):
        return self.mask

    def set_range(self, name):
        self.range_pin.value(1 if name == "high" else 0)
        time.sleep_us(200)  # analogue switch and amplifier settle

    def full_scale_a(self, name):
        return frontend.full_scale_a(self.fe, name)

    def amps_to_code(self, name, amps):
        return frontend.amps_to_code(self.fe, name, amps)

    def _room_sensor(self):
        """The 1-Wire sensor U3 on the socket plate, if one answers."""
        try:
            import ds18x20
            import onewire
            ds = ds18x20.DS18X20(onewire.OneWire(machine.Pin(self.fe["gpio"]["ambient_1wire"])))
            roms = ds.scan()
            return (ds, roms[0]) if roms else None
        except (ImportError, OSError):
            return None

    def ambient_c(self):
        sensor = self._room_sensor()
        if sensor:
            ds, rom = sensor
            ds.convert_temp()
            time.sleep_ms(750)  # 12-bit conversion time, before the heater is on
            return round(ds.read_temp(rom), 1)
        # fallback: the chip's own sensor (RP2040 datasheet 4.9.5): coarse, a
        # few kelvin, and warmed by the chip itself
        v = self.temp_adc.read_u16() * 3.3 / 65535
        return round(27.0 - (v - 0.706) / 0.001721, 1)

    # sampling
    def use_channels(self, names):
        """Sample only these channels (in the order of `channels`, which is
        the ADC inputs' order, as the round robin takes them)."""
        self.active = [self.channels.index(n) for n in names]

    def sample(self, buf, n_sets, t_start, interval, oversample, trip_code, current_idx):
        per_conversion_us = interval / (oversample * len(self.active))
        if 2 <= per_conversion_us <= _MAX_CONVERSION_US:
            return self._sample_dma(buf, n_sets, t_start, interval, oversample, trip_code,
                                    current_idx)
        return self._sample_paced(buf, n_sets, t_start, interval, oversample,
                                  trip_code, current_idx)

    def _sample_paced(self, buf, n_sets, t_start, interval, oversample, trip_code,
                      current_idx):
        adcs = [self.adcs[c] for c in self.active]
        nch = len(adcs)
        trip_sum = trip_code * oversample
        while time.ticks_diff(t_start, time.ticks_us()) > 0:
            pass
        self._close_armed_gates()  # switch_on() without the DMA
        t0 = time.ticks_us()
        for k in range(n_sets):
            due = time.ticks_add(t0, k * interval)
            while time.ticks_diff(due, time.ticks_us()) > 0:
                pass
            base = k * nch
            for c in range(nch):
                a = adcs[c]
                s = 0
                for _ in range(oversample):
                    s += a.read_u16() >> 4
                buf[base + c] = s
            if trip_code:
                for c in current_idx:
                    if buf[base + c] > trip_sum:
                        self.heater(0)
                        return k + 1, t0, True
        self.wdt.feed()
        return n_sets, t0, False

    def over_current(self, trip_code, current_idx):
        """One conversion of each switched current channel now, between two
        chunks, when no transfer runs (the converter idles while blocks go
        to USB): the heater off and True when one is over trip_code."""
        if not self.mask:
            return False
        for c in current_idx:
            if self._convert_once(self.inputs[self.active[c]]) > trip_code:
                self.heater(0)
                return True
        return False

    def _convert_once(self, adc_input):
        """One conversion by the registers, with a limit: ADC.read_u16()
        waits for ever on a converter that has stopped (the emulated RP2040's
        stalled-converter test hung in it until the watchdog)."""
        machine.mem32[_ADC_CS] = 1 | (adc_input << 12) | (1 << 2)  # EN, AINSEL, START_ONCE
        t = time.ticks_us()
        while not machine.mem32[_ADC_CS] & (1 << 8):  # READY
            if time.ticks_diff(time.ticks_us(), t) > _ONE_CONVERSION_MAX_US:
                self.heater(0)
                raise OSError("converter stalled: no result in %d us" % _ONE_CONVERSION_MAX_US)
        return machine.mem32[_ADC_RESULT] & 0xFFF

    def switch_on(self, mask, buf, n_sets, interval, oversample, trip_code, current_idx):
        """Switch the heater on with the converter already running: the DMA
        is set up and the conversions started first, then the gates (set-up
        after switching on cost the first 0.7 ms of the inrush on the
        emulated RP2040). Returns (t_on, (sets, t_first, tripped))."""
        self._on_mask = mask
        self._t_on = None
        try:
            got = self.sample(buf, n_sets, time.ticks_us(), interval, oversample, trip_code,
                              current_idx)
        finally:
            self._on_mask = 0  # never left armed for a later sample() to switch on
        return self._t_on, got

    def _close_armed_gates(self):
        """The gates switch_on() armed, closed now (once), and when."""
        if self._on_mask:
            self._t_on = self.heater(self._on_mask)
            self._on_mask = 0

    def _sample_dma(self, buf, n_sets, t_start, interval, oversample, trip_code, current_idx):
        inputs = [self.inputs[c] for c in self.active]
        nch = len(inputs)
        total = n_sets * oversample * nch
        # the conversions go to buf itself when a set is one conversion, else
        # to a scratch buffer, summed into buf afterwards
        if oversample == 1:
            raw = buf
        else:
            if len(self._raw) < total:
                self._raw = array.array("H", bytes(2 * total))
            raw = self._raw
        mask = 0
        for i in inputs:
            mask |= 1 << i
        # a conversion every interval/(oversample*nch) us, round robin from the
        # lowest input
        div = (_ADC_CLOCK_HZ * interval // (1000000 * oversample * nch)) - 1
        machine.mem32[_ADC_CS] = 1  # enable, stopped
        machine.mem32[_ADC_FCS] = (1 << 0) | (1 << 3) | (1 << 24)  # FIFO, DREQ, thresh 1
        while not machine.mem32[_ADC_FCS] & (1 << 8):  # drain stale results
            machine.mem32[_ADC_FIFO]
        machine.mem32[_ADC_DIV] = div << 8
        rr_shift = 16
        ainsel_shift = 12
        dma = rp2.DMA()
        ctrl = dma.pack_ctrl(size=1, inc_read=False, inc_write=True, treq_sel=_DREQ_ADC)
        dma.config(read=_ADC_FIFO, write=raw, count=total, ctrl=ctrl, trigger=True)
        while time.ticks_diff(t_start, time.ticks_us()) > 0:
            pass
        t0 = time.ticks_us()
        machine.mem32[_ADC_CS] = (1 | (1 << 3) | (inputs[0] << ainsel_shift)
                                  | (mask << rr_shift))
        self._close_armed_gates()  # switch_on(): the converter is running
        tripped = False
        checked = 0  # conversion rounds (one of every channel) looked at
        # a converter that stops (no DREQ) would hold this loop, the heater
        # on, until the watchdog: off and an error once the transfer is
        # well past the time it takes
        deadline = time.ticks_add(t0, n_sets * interval + (n_sets * interval >> 3)
                                  + _STALL_MARGIN_US)
        try:
            while dma.active():
                done = (total - dma.count) // nch
                if done > checked:
                    for c in current_idx:
                        if _any_over(raw, checked, done, nch, c, trip_code):
                            tripped = True
                    checked = done
                    if tripped:
                        self.heater(0)
                        break
                elif time.ticks_diff(time.ticks_us(), deadline) > 0:
                    self.heater(0)
                    raise OSError("converter stalled: %d of %d conversions"
                                  % (total - dma.count, total))
        finally:
            machine.mem32[_ADC_CS] = 1  # stop free-running
            machine.mem32[_ADC_FCS] = 0  # FIFO off: paced phases read RESULT
            remaining = dma.count
            # stopped early (a trip, a stall): the channel is aborted, else it
            # stays busy on the converter's requests and the next capture's
            # transfer, on the same channel, ran on with its count (seen on
            # the emulated RP2040: the baseline after a trip "stalled")
            dma.active(0)
            dma.close()
        # after a trip, the whole sets only (the trip record has its time)
        done = (total - remaining) // (oversample * nch) if tripped else n_sets
        if oversample > 1:
            _sum_sets(raw, buf, done, oversample, nch)
        self.wdt.feed()
        return done, t0, tripped

    # link
    def read_input(self):
        data = bytearray()
        while len(data) < 512 and self.poller.poll(0):
            b = self.stdin.read(1)
            if not b:
                break
            data.extend(b)
        return bytes(data)

    def write(self, data):
        # bounded: a host that stops reading must not hold the capture loop
        # (the supervisor runs between blocks); a frame the USB endpoint
        # cannot take within _WRITE_WAIT_MS is dropped and the host sees
        # the gap in the frame numbers
        if not self.out_poller.poll(_WRITE_WAIT_MS):
            return False
        self.stdout.write(data)
        return True

    def idle(self, ms):
        self.poller.poll(ms)

    def feed_watchdog(self):
        self.wdt.feed()

    def save_calibration(self, cal):
        with open(_CAL_PATH, "w") as f:
            json.dump(cal, f)
        self.calibration = cal

    def enter_repl(self):
        # the watchdog cannot be stopped: reboot, and have main.py stay at
        # the REPL this once (mpremote then installs or inspects files)
        with open(REPL_FLAG, "w") as f:
            f.write("1")
        machine.reset()
