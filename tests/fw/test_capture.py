# A whole capture through the firmware core on a fake board.
import json
import struct

from glowfw import proto
from glowfw.app import App
from fakeboard import FakeBoard, frames_out


def run(board, params):
    app = App(board)
    app.on_frame(proto.CAPTURE, 0, json.dumps(params).encode())
    app.run_pending()
    return frames_out(board)


def by_type(frames, t):
    return [f for f in frames if f[0] == t]


def test_capture_ends_settled_with_heater_off():
    b = FakeBoard()
    fr = run(b, {"section": "A", "max_s": 20, "settle_hold_s": 1.0, "settle_min_s": 3.0})
    end = json.loads(bytes(by_type(fr, proto.CAPTURE_END)[0][2]))
    assert end["reason"] == "settled", end
    assert b.mask == 0 and b.switch_log[-1][1] == 0
    blocks = by_type(fr, proto.BLOCK)
    assert len(blocks) == end["blocks"]
    total = 0
    for i, f in enumerate(blocks):
        head = struct.unpack(proto.BLOCK_HEADER, bytes(f[2][:proto.BLOCK_HEADER_SIZE]))
        assert head[1] == i  # block index
        total += head[4]
    assert total == end["sets"]
    # sequence numbers run without a gap
    seqs = [f[1] for f in fr]
    assert seqs == list(range(seqs[0], seqs[0] + len(seqs)))


def test_baseline_block_precedes_switch_on():
    b = FakeBoard()
    fr = run(b, {"section": "AB", "max_s": 0.1})
    head = struct.unpack(proto.BLOCK_HEADER, bytes(by_type(fr, proto.BLOCK)[0][2][:18]))
    assert head[2] == 0 and head[6] < 0  # phase 0, negative time
    assert json.loads(bytes(by_type(fr, proto.CAPTURE_END)[0][2]))["reason"] == "max_time"


def test_short_trips_within_one_ms():
    b = FakeBoard(short=True)
    fr = run(b, {"section": "A", "range": "high", "trip_a": 20})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "over_current" and trip["at_us"] <= 1000, trip
    on = [t for t, m in b.switch_log if m][0]
    off = [t for t, m in b.switch_log if t >= on and m == 0][0]
    assert off - on <= 1000


def test_a_short_between_chunks_is_caught_before_the_next_frame():
    """Between two chunks the converter idles while blocks go to the link: a
    short that begins there is read before the next frame is sent, not when
    the next chunk starts."""
    b = FakeBoard()
    b.short_between_chunks_at = 100000  # in the fast phase
    fr = run(b, {"section": "A", "max_s": 2})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "over_current", trip
    on = [t for t, m in b.switch_log if m][0]
    off = [t for t, m in b.switch_log if t >= on and m == 0][0]
    # the first reading at or after the short is the one that switches off
    first = min(t for t in b.checks if t >= 100000)
    assert off == first and trip["at_us"] == off - on
    # one reading per frame sent while on (here two frames per fast chunk:
    # its own block and a held dense one); the short itself only these see
    assert len([t for t in b.checks if t < 100000]) >= 4


def test_open_heater_trips():
    b = FakeBoard(amps=0.0)
    fr = run(b, {"section": "B"})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "open_heater" and 20000 <= trip["at_us"] <= 25000, trip
    assert b.mask == 0


def test_max_on_time_trips():
    b = FakeBoard()
    fr = run(b, {"section": "A", "max_s": 60, "max_on_s": 1.0, "settle_min_s": 50})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "max_on_time" and 1000000 <= trip["at_us"] <= 1200000, trip


def test_host_silence_trips():
    b = FakeBoard()
    b.wall_follows = True  # time passes and the host sends nothing
    fr = run(b, {"section": "A", "max_s": 60, "silence_ms": 500, "settle_min_s": 50})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "host_silent" and trip["at_us"] < 800000, trip
    assert b.mask == 0


def test_exception_switches_off_and_reports():
    b = FakeBoard()
    orig = b.sample
    calls = [0]

    def failing(*a):
        calls[0] += 1
        if calls[0] == 3:
            raise OSError(5)
        return orig(*a)
    b.sample = failing
    fr = run(b, {"section": "A"})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "exception" and "OSError" in trip["detail"]
    assert b.mask == 0


def test_bad_parameters_are_refused():
    b = FakeBoard()
    app = App(b)
    app.on_frame(proto.CAPTURE, 7, json.dumps({"section": "C"}).encode())
    rep = json.loads(bytes(by_type(frames_out(b), proto.REPLY)[0][2]))
    assert rep["to"] == 7 and rep["ok"] is False and "section" in rep["msg"]
    assert app.pending is None and b.mask == 0


def test_measure_reads_and_switches_off():
    from glowfw import measure
    b = FakeBoard(amps=1.0)
    p = measure.parse({"section": "A", "sets": 50}, b)
    r = measure.run(b, p)
    assert r["sets"] == 50 and not r["tripped"] and b.mask == 0
    want = int(1.0 / 3.3 * 4096)
    assert abs(r["means"][0] - want) < 1 and r["means"][1] == 0 and r["stds"][0] == 0


def test_measure_trips_on_a_short_and_refuses_long_or_unknown():
    from glowfw import measure
    from glowfw.params import ParamError
    b = FakeBoard(short=True)
    r = measure.run(b, measure.parse({"section": "AB"}, b))
    assert r["tripped"] and b.mask == 0
    for bad in ({"sets": 400, "interval_us": 5000}, {"colour": 1}, {"section": "C"}):
        try:
            measure.parse(bad, b)
        except ParamError:
            continue
        raise AssertionError("accepted " + repr(bad))


def test_a_trip_with_no_whole_set_is_still_an_over_current():
    # the rp2 keeps whole oversampled sets only: a trip in a chunk's first set
    # leaves none, and must still be reported as the over-current it is
    class TripInFirstSet(FakeBoard):
        def sample(self, buf, n, t_start, interval, osm, trip_code, current_idx):
            if osm > 1 and self.mask:
                self.heater(0)
                return 0, max(t_start, self.t), True
            return FakeBoard.sample(self, buf, n, t_start, interval, osm, trip_code,
                                    current_idx)
    b = TripInFirstSet()
    fr = run(b, {"section": "A"})
    trip = json.loads(bytes(by_type(fr, proto.TRIP)[0][2]))
    assert trip["cause"] == "over_current", trip
    assert b.mask == 0
