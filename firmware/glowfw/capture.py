# One capture: baseline with the heater off, switch-on, the multi-rate
# schedule, an adaptive end, and the heater off whatever happens.
import array
import struct
import time

from glowfw import proto, schedule, supervisor
from glowfw.params import ParamError, merge
from glowfw.settle import SettleDetector

SECTION_MASKS = {"A": 1, "B": 2, "AB": 3}

DEFAULTS = {
    "section": "A",
    "range": "low",
    "max_s": 60.0,
    "max_on_s": None,       # None: the board's own limit
    "settle_band": 0.01,    # relative band about the predicted final current
    "settle_hold_s": 0.3,   # ... the current has been within for this long
    "settle_min_s": 3.0,    # never end before this
    "trip_a": None,         # None: 95 % of the range's full scale
    "open_a": None,         # None: 2 % of the range's full scale
    "silence_ms": 2000,     # heater off when the host is silent this long
}


class CaptureError(ParamError):
    pass


class _OverCurrent(Exception):
    """An over-current seen between two chunks (capture.run catches it);
    args[0]: the board's time of the reading, us."""


def parse_params(raw, board):
    p = merge(DEFAULTS, raw, "capture")
    if p["section"] not in SECTION_MASKS:
        raise CaptureError("section must be A, B or AB")
    if p["section"] != "A" and "ib" not in board.channels:
        raise CaptureError("this board has no section B channel")
    if p["range"] not in board.ranges:
        raise CaptureError("unknown current range: " + str(p["range"]))
    board_max = board.max_on_s
    if p["max_on_s"] is None or p["max_on_s"] > board_max:
        p["max_on_s"] = board_max
    # the capture's length and the on-time limit are separate: the supervisor
    # trips at max_on_s even if the capture asked for longer
    if not float(p["max_s"]) > 0:  # also refuses NaN
        raise CaptureError("max_s must be a positive number of seconds")
    p["max_s"] = min(max(float(p["max_s"]), 0.05), board_max)
    fs = board.full_scale_a(p["range"])
    if p["trip_a"] is None or p["trip_a"] > fs:
        p["trip_a"] = 0.95 * fs
    if p["open_a"] is None:
        p["open_a"] = 0.02 * fs
    if not (0 < p["settle_band"] < 0.5 and p["settle_hold_s"] > 0):  # False for NaN too
        raise CaptureError("settle band must be in (0, 0.5) and hold time > 0")
    if not 100 <= p["silence_ms"] <= 10000:
        raise CaptureError("silence_ms must be 100..10000")
    return p


def _means(buf, nch, first, count, channels, oversample):
    """Mean code per conversion of each listed channel over sets
    first..first+count-1."""
    out = []
    for c in channels:
        s = 0
        i = first * nch + c
        for _ in range(count):
            s += buf[i]
            i += nch
        out.append(s / (count * oversample))
    return out


class Capture:
    def __init__(self, board, link, sup, capture_id, params):
        self.board = board
        self.link = link
        self.sup = sup
        self.id = capture_id
        self.p = params
        # the switched sections' currents, the voltage (and light): an idle
        # section's channel would only add converter noise to the link and
        # the logbook
        switched = ["i" + s.lower() for s in params["section"]]
        self.channels = [n for n in board.channels if n not in ("ia", "ib") or n in switched]
        self.nch = len(self.channels)
        self.current_idx = [self.channels.index(n) for n in switched]
        self.block_index = 0
        self.sets = 0
        self.abort_requested = False
        self.trip_record = None
        self.watch_code = 0  # while the heater is on: each frame sent is watched

    def _watch(self):
        """Between chunks the converter does not run and blocks go to the
        link: one reading of the currents before each frame, so a short
        that begins there waits a frame, not the whole gap."""
        if self.watch_code and self.board.over_current(self.watch_code, self.current_idx):
            self.watch_code = 0
            raise _OverCurrent(self.board.now_us())

    def send_block(self, phase_no, t_rel, interval, oversample, buf, first, count):
        self._watch()
        nch = self.nch
        head = struct.pack(proto.BLOCK_HEADER, self.id, self.block_index,
                           phase_no, nch, count, oversample, t_rel, interval)
        data = memoryview(buf)[first * nch:(first + count) * nch]
        self.link.send(proto.BLOCK, head + bytes(data))
        self.block_index += 1
        self.sets += count
        self.link.poll()  # heartbeats and abort between blocks

    def _send_held(self, pending, dense, dense_buf, all_of_them, base=None):
        """One pending block of the baseline or the dense phase (all of them
        once the capture stops); the baseline's `first` is None."""
        while pending:
            t_rel, first, count = pending.pop(0)
            if first is None:
                bl = schedule.BASELINE
                self.send_block(0, t_rel, bl[2], bl[3], base, 0, count)
            else:
                self.send_block(1, t_rel, dense[2], dense[3], dense_buf, first, count)
            if not all_of_them:
                return

    def run(self):
        b = self.board
        p = self.p
        nch = self.nch
        max_us = int(p["max_s"] * 1000000)
        phases = schedule.build(nch, max_us)
        # the dense phase's sets stay in their own buffer until sent, a block
        # before each later chunk's own (spread, so the link never bursts)
        dense = phases[0]
        dense_buf = array.array("H", bytes(2 * nch * dense[5]))
        chunk = max([ph[5] for ph in phases[1:]] + [schedule.baseline_sets()])
        buf = array.array("H", bytes(2 * nch * chunk))
        pending = []  # held blocks still to send: (t_rel, first set or None, sets)
        b.set_range(p["range"])
        trip_code = b.amps_to_code(p["range"], p["trip_a"])
        self.sup.arm(p["silence_ms"], int(p["max_on_s"] * 1000000),
                     b.amps_to_code(p["range"], p["open_a"]))
        settle = SettleDetector(p["settle_band"], int(p["settle_hold_s"] * 1000000),
                                int(p["settle_min_s"] * 1000000))
        self.link.send_json(proto.CAPTURE_START, {
            "id": self.id, "params": p, "channels": self.channels,
            "ambient_c": b.ambient_c(),
            "phases": [[ph[0], ph[1], ph[2], ph[3]] for ph in phases]})
        reason = None
        cause = None
        detail = None
        t_on = None
        t_off_rel = None
        b.use_channels(self.channels)
        try:
            # baseline: heater off, offsets of every channel
            bl = schedule.BASELINE
            n_base, t_base, _ = b.sample(buf, bl[4], b.now_us(), bl[2], bl[3], 0, ())
            offsets = _means(buf, nch, 0, n_base, range(nch), bl[3])
            base = array.array("H", bytes(memoryview(buf)[:n_base * nch]))
            rel = 0
            for phase_no, ph in enumerate(phases, 1):
                name, end_us, interval, osm, block_sets, chunk_sets = ph
                end = end_us if end_us < max_us else max_us
                into = dense_buf if phase_no == 1 else buf
                while reason is None and rel < end:
                    n = min(chunk_sets, (end - rel + interval - 1) // interval)
                    if t_on is None:
                        # switch-on with the converter already running, and
                        # nothing that talks USB before the dense phase is in
                        # (on the emulated RP2040 the baseline block sent
                        # first cost 8 ms of the inrush); the baseline is
                        # sent after it
                        t_on, (done, t_first, tripped) = b.switch_on(
                            SECTION_MASKS[p["section"]], into, n, interval, osm,
                            trip_code, self.current_idx)
                        self.watch_code = trip_code
                        self.sup.heard_host()
                        pending.append((time.ticks_diff(t_base, t_on), None, n_base))
                    else:
                        done, t_first, tripped = b.sample(
                            into, n, time.ticks_add(t_on, rel), interval, osm,
                            trip_code, self.current_idx)
                    rel_first = time.ticks_diff(t_first, t_on)
                    if tripped:
                        t_off_rel = rel_first + (done - 1) * interval
                    if phase_no == 1:
                        for k in range(0, done, block_sets):
                            pending.append((rel_first + k * interval, k,
                                            min(block_sets, done - k)))
                    # one held block (the baseline, then the dense phase's)
                    # before each later chunk's own: all of them after a trip
                    if pending and (phase_no > 1 or tripped):
                        self._send_held(pending, dense, dense_buf, tripped, base)
                    if phase_no > 1:
                        for k in range(0, done, block_sets):
                            self.send_block(phase_no, rel_first + k * interval, interval,
                                            osm, buf, k, min(block_sets, done - k))
                    rel = rel_first + done * interval
                    if phase_no == 1:
                        # one acquisition: its first sets may precede the
                        # gate by a few us (the rp2 starts the converter
                        # first), and the few sets that leaves short of the
                        # phase's end are not worth a second transfer, which
                        # came after a 5 ms gap on the emulated RP2040
                        rel = end if rel < end else rel
                    tail = min(block_sets, done)
                    # no whole set (an rp2 trip in a chunk's first set): the
                    # supervisor still hears of the trip
                    means = (_means(into, nch, done - tail, tail, self.current_idx, osm)
                             if tail else [0.0] * len(self.current_idx))
                    cause = self.sup.check(rel, min(means), tripped)
                    if cause is not None:
                        reason = "trip"
                        break
                    if self.abort_requested:
                        reason = "abort"
                        break
                    if interval >= 1000:
                        total = 0.0
                        for j, c in enumerate(self.current_idx):
                            total += means[j] - offsets[c]
                        if settle.update(rel, total):
                            reason = "settled"
                if reason is not None:
                    break
            if reason is None:
                reason = "max_time"
        except _OverCurrent as e:  # seen between chunks: already off
            reason = "trip"
            cause = supervisor.OVER_CURRENT
            t_off_rel = time.ticks_diff(e.args[0], t_on)
        except Exception as e:  # any fault: off first, then report
            b.heater(0)
            reason = "trip"
            cause = supervisor.EXCEPTION
            detail = repr(e)
        finally:
            self.watch_code = 0  # the heater goes off: the last sends are not watched
            t_off = b.heater(0)
            b.use_channels(b.channels)
        if pending:  # a capture that ended in the fast phase: the rest, heater off
            self._send_held(pending, dense, dense_buf, True, base)
        if t_on is None:
            t_on = t_off
        if t_off_rel is None:
            t_off_rel = time.ticks_diff(t_off, t_on)
        if cause is not None:
            # ms: the link clock (wall time) at the trip, comparable with STATUS;
            # kept for STATUS too, in case this frame cannot reach the host
            self.trip_record = {"id": self.id, "cause": cause, "at_us": t_off_rel,
                                "detail": detail, "ms": b.link_ms()}
            self.link.send_json(proto.TRIP, self.trip_record)
        self.link.send_json(proto.CAPTURE_END, {
            "id": self.id, "reason": reason, "trip": cause, "detail": detail,
            "blocks": self.block_index, "sets": self.sets, "off_us": t_off_rel,
            "dropped": self.link.dropped})
        return reason
