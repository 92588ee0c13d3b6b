# The firmware's end of the link: numbered frames out, commands in.
import json

from glowfw import frames


class Link:
    def __init__(self, board):
        self.board = board
        self.seq = 0
        self.dropped = 0  # frames the board could not write in its bounded wait
        self.deframer = frames.Deframer()
        self.on_frame = None  # called with (type, seq, body) for every command

    def send(self, mtype, body=b""):
        # the board's write never blocks for long: a host that stops reading
        # must not hold the capture loop (and the heater) where the
        # supervisor cannot run. A frame not written is dropped; its number
        # is used all the same, so the host sees the gap and the capture is
        # never taken for a whole one.
        if self.board.write(frames.pack(mtype, self.seq, body)) is False:
            self.dropped += 1
        self.seq = (self.seq + 1) & 0xFFFF

    def send_json(self, mtype, obj):
        self.send(mtype, json.dumps(obj).encode())

    def poll(self):
        """Read what the host has sent and hand each command to on_frame."""
        data = self.board.read_input()
        if data:
            for f in self.deframer.feed(data):
                self.on_frame(f[0], f[1], f[2])
