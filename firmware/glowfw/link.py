# The firmware's end of the link: numbered frames out, commands in.
import json

from glowfw import frames


class Link:
    def __init__(self, board):
        self.board = board
        self.seq = 0
        self.deframer = frames.Deframer()
        self.on_frame = None  # called with (type, seq, body) for every command

    def send(self, mtype, body=b""):
        self.board.write(frames.pack(mtype, self.seq, body))
        self.seq = (self.seq + 1) & 0xFFFF

    def send_json(self, mtype, obj):
        self.send(mtype, json.dumps(obj).encode())

    def poll(self):
        """Read what the host has sent and hand each command to on_frame."""
        data = self.board.read_input()
        if data:
            for f in self.deframer.feed(data):
                self.on_frame(f[0], f[1], f[2])
