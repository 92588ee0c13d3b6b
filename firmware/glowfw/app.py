# The command loop: hello at boot, then commands from the host, one capture at
# a time. The heater is off before the first line runs and after every capture.
import json

from glowfw import VERSION, measure, proto, supervisor
from glowfw.capture import Capture, parse_params
from glowfw.params import ParamError
from glowfw.link import Link
from glowfw.supervisor import Supervisor


class App:
    def __init__(self, board):
        board.heater(0)
        self.board = board
        self.link = Link(board)
        self.link.on_frame = self.on_frame
        self.sup = Supervisor(board)
        self.capture = None
        self.pending = None
        self.next_id = 1
        self.last_trip = None

    def hello(self, boot):
        b = self.board
        return {"firmware": VERSION, "protocol": proto.PROTOCOL_VERSION,
                "board": b.board_id, "boot": boot, "reset_cause": b.reset_cause,
                "channels": b.channels, "frontend": b.frontend,
                "calibration": b.calibration, "max_on_s": b.max_on_s}

    def status(self):
        return {"state": "capturing" if self.capture else "idle",
                "heater": self.board.heater_state(),
                "last_trip": self.last_trip, "next_id": self.next_id,
                "ms": self.board.link_ms(), "calibration": self.board.calibration}

    def reply(self, seq, ok, msg=None):
        self.link.send_json(proto.REPLY, {"to": seq, "ok": ok, "msg": msg})

    def on_frame(self, mtype, seq, body):
        self.sup.heard_host()  # any valid frame counts as a heartbeat
        if mtype == proto.HEARTBEAT:
            return
        if mtype == proto.IDENTIFY:
            self.link.send_json(proto.HELLO, self.hello(False))
        elif mtype == proto.GET_STATUS:
            self.link.send_json(proto.STATUS, self.status())
        elif mtype == proto.ABORT:
            if self.capture:
                self.capture.abort_requested = True
            self.board.heater(0)
            self.reply(seq, True)
        elif mtype == proto.CAPTURE:
            if self.capture or self.pending:
                self.reply(seq, False, "busy: a capture is running")
                return
            try:
                params = parse_params(json.loads(bytes(body)), self.board)
            except (ValueError, ParamError) as e:
                self.reply(seq, False, str(e))
                return
            self.reply(seq, True)
            self.pending = params
        elif mtype == proto.MEASURE:
            if self.capture:
                self.reply(seq, False, "busy: a capture is running")
                return
            try:
                p = measure.parse(json.loads(bytes(body)), self.board)
            except (ValueError, ParamError) as e:
                self.reply(seq, False, str(e))
                return
            result = measure.run(self.board, p)
            result["to"] = seq
            self.link.send_json(proto.MEASUREMENT, result)
        elif mtype == proto.SET_CALIBRATION:
            try:
                cal = json.loads(bytes(body))
                if not isinstance(cal, dict) or "source" not in cal:
                    raise ValueError("a calibration is an object with a source")
                self.board.save_calibration(cal)
            except (ValueError, OSError) as e:
                self.reply(seq, False, "calibration not saved: " + str(e))
                return
            self.reply(seq, True)
        elif mtype == proto.ENTER_REPL:
            if self.capture:
                self.reply(seq, False, "busy: a capture is running")
                return
            self.board.heater(0)
            self.reply(seq, True)
            self.board.enter_repl()
        else:
            self.reply(seq, False, "unknown command %d" % mtype)

    def run_pending(self):
        params, self.pending = self.pending, None
        cid = self.next_id
        self.next_id = (self.next_id + 1) & 0xFFFF or 1
        self.capture = Capture(self.board, self.link, self.sup, cid, params)
        try:
            self.capture.run()
            if self.capture.trip_record is not None:
                self.last_trip = self.capture.trip_record
        finally:
            self.capture = None
            self.board.heater(0)

    def step(self, wait_ms):
        self.board.feed_watchdog()
        self.link.poll()
        if self.pending:
            self.run_pending()
        else:
            self.board.idle(wait_ms)

    def run(self):
        self.link.send_json(proto.HELLO, self.hello(True))
        while True:
            try:
                self.step(20)
            except Exception as e:
                # a fault outside a capture: heater off, tell the host, go on
                self.board.heater(0)
                self.link.send_json(proto.TRIP, {"id": 0, "cause": supervisor.EXCEPTION,
                                                 "at_us": 0, "detail": repr(e)})


def main(board):
    try:
        App(board).run()
    finally:
        board.heater(0)
