"""Driver for a glowtrace tester on a serial link: handshake, commands and the
message flow of one capture. Transport and storage are elsewhere."""

import json
import time
from contextlib import contextmanager

from . import protocol
from .raw import RawCapture
from ..errors import DeviceError, GlowtraceError, LinkError
from .link import Link
from .transport import open_port

HEARTBEAT_S = 0.4      # the firmware trips after 2 s of silence by default
SILENT_DEVICE_S = 5.0  # no frame at all for this long: the link is lost


class CaptureInterrupted(Exception):
    """Raised inside capture(); carries the partial capture."""

    def __init__(self, reason: str, raw: RawCapture):
        super().__init__(reason)
        self.reason = reason
        self.raw = raw


@contextmanager
def connect(url: str, timeout: float = 3.0, tries: int = 3):
    """Open a port, drop stale frames, and yield the identified Tester; the
    port is closed on the way out."""
    port = open_port(url)
    try:
        tester = Tester(Link(port), url)
        tester.link.drain()
        tester.identify(timeout=timeout, tries=tries)
        yield tester
    finally:
        port.close()


class Tester:
    def __init__(self, link: Link, port_name: str = ""):
        self.link = link
        self.port_name = port_name
        self.hello: dict | None = None

    def _send_json(self, mtype: int, obj) -> int:
        seq = self.link.seq
        self.link.send(mtype, json.dumps(obj).encode())
        return seq

    def _await(self, want: set, timeout: float, reply_to: int | None = None):
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            f = self.link.receive(deadline - time.monotonic())
            if f is None:
                break
            if f.mtype in want:
                if reply_to is None or f.mtype != protocol.REPLY or f.json().get("to") == reply_to:
                    return f
        return None

    def identify(self, timeout: float = 3.0, tries: int = 3) -> dict:
        for _ in range(tries):
            self.link.send(protocol.IDENTIFY)
            f = self._await({protocol.HELLO}, timeout / tries)
            if f is not None:
                hello = f.json()
                if hello.get("protocol") != protocol.PROTOCOL_VERSION:
                    raise DeviceError(
                        f"tester speaks protocol {hello.get('protocol')}, this glowtrace "
                        f"speaks {protocol.PROTOCOL_VERSION}: update the firmware")
                self.hello = hello
                return hello
        raise LinkError(f"no glowtrace tester answered on {self.port_name or 'the port'}")

    def status(self, timeout: float = 2.0) -> dict:
        self.link.send(protocol.GET_STATUS)
        f = self._await({protocol.STATUS}, timeout)
        if f is None:
            raise LinkError("the tester did not answer a status request")
        return f.json()

    def _command(self, mtype: int, body, timeout: float = 3.0) -> None:
        """Send a command that is answered by a REPLY; raise if refused."""
        seq = self._send_json(mtype, body) if body is not None else self._send_empty(mtype)
        f = self._await({protocol.REPLY}, timeout, reply_to=seq)
        if f is None:
            raise LinkError("the tester did not answer")
        if not f.json()["ok"]:
            raise DeviceError(f"the tester refused: {f.json()['msg']}")

    def _send_empty(self, mtype: int) -> int:
        seq = self.link.seq
        self.link.send(mtype)
        return seq

    def measure(self, section: str = "", range_name: str = "low", sets: int = 100,
                interval_us: int = 1000, oversample: int = 16, settle_ms: int = 20) -> dict:
        """A short steady measurement (heater on for at most 0.5 s): mean and
        standard deviation of each channel in converter codes."""
        seq = self._send_json(protocol.MEASURE, {
            "section": section, "range": range_name, "sets": sets,
            "interval_us": interval_us, "oversample": oversample, "settle_ms": settle_ms})
        deadline = time.monotonic() + 3.0
        while time.monotonic() < deadline:
            f = self.link.receive(deadline - time.monotonic())
            if f is None:
                break
            if f.mtype == protocol.MEASUREMENT and f.json().get("to") == seq:
                return f.json()
            if f.mtype == protocol.REPLY and f.json().get("to") == seq and not f.json()["ok"]:
                raise DeviceError(f"the tester refused the measurement: {f.json()['msg']}")
        raise LinkError("the tester did not return the measurement")

    def set_calibration(self, cal: dict) -> None:
        self._command(protocol.SET_CALIBRATION, cal)
        if self.hello is not None:
            self.hello["calibration"] = cal

    def enter_repl(self) -> None:
        self._command(protocol.ENTER_REPL, None)

    def abort(self) -> None:
        """Ask for heater off. Best effort: if the link is gone the firmware's
        host-silence trip does the same within its timeout."""
        try:
            self.link.send(protocol.ABORT)
        except LinkError:
            pass

    def ensure_off(self, timeout: float = 1.0) -> bool:
        """Ask for heater off and confirm it from the tester's status."""
        self.abort()
        try:
            return self.status(timeout)["heater"] == 0
        except GlowtraceError:
            return False

    def capture(self, tube: str | None, section: str, params: dict,
                progress=None, should_stop=None) -> RawCapture:
        """Run one capture. Returns the whole capture; raises
        CaptureInterrupted with the partial one when it cannot be whole.
        should_stop(): polled while capturing; True stops it as Ctrl-C does
        (a capture in a thread of its own, which Ctrl-C never reaches)."""
        if self.hello is None:
            self.identify()
        raw = RawCapture(tube=tube, section=section, port=self.port_name, hello=self.hello)
        seq = self._send_json(protocol.CAPTURE, dict(params, section=section))
        reply = self._await({protocol.REPLY}, 3.0, reply_to=seq)
        if reply is None:
            raise LinkError("the tester did not acknowledge the capture command")
        if not reply.json()["ok"]:
            raise DeviceError(f"the tester refused the capture: {reply.json()['msg']}")
        # count the link's losses from the acknowledgement on: a stale frame
        # of the handshake lost before it is not a hole in this capture
        self.link.reset_stats()
        last_hb = last_rx = time.monotonic()
        capture_id = None
        try:
            while True:
                now = time.monotonic()
                if now - last_hb >= HEARTBEAT_S:
                    self.link.send(protocol.HEARTBEAT)
                    last_hb = now
                if should_stop is not None and should_stop():
                    raise KeyboardInterrupt
                f = self.link.receive(0.1)
                if f is None:
                    if time.monotonic() - last_rx > SILENT_DEVICE_S:
                        raise CaptureInterrupted("the tester went silent", raw)
                    continue
                last_rx = time.monotonic()
                if f.mtype == protocol.BLOCK:
                    raw.blocks.append(protocol.Block.parse(f.body))
                    capture_id = raw.blocks[-1].capture_id
                    if progress:
                        try:
                            progress(raw)
                        except Exception:  # noqa: BLE001 - a display must not end a capture
                            progress = None
                elif f.mtype == protocol.CAPTURE_START:
                    start = f.json()
                    capture_id = start.get("id")
                    raw.params = start["params"]
                    raw.channels = start["channels"]
                    raw.ambient_c = start.get("ambient_c")
                    raw.phases = start.get("phases", [])
                elif f.mtype == protocol.TRIP:
                    raw.trip = f.json()
                elif f.mtype == protocol.CAPTURE_END:
                    raw.end = f.json()
                    break
                elif f.mtype == protocol.HELLO and f.json().get("boot"):
                    self.hello = f.json()
                    raise CaptureInterrupted(
                        f"the tester reset during the capture ({self.hello.get('reset_cause')})",
                        raw)
        except KeyboardInterrupt:
            self.abort()
            raise CaptureInterrupted("interrupted by the user", raw) from None
        except LinkError as e:
            self._trip_from_status(raw, capture_id)
            raise CaptureInterrupted(str(e), raw) from None
        finally:
            raw.link = self.link.stats.as_dict()
        why = raw.check_whole()
        if why:
            self._trip_from_status(raw, capture_id)
            raise CaptureInterrupted(why, raw)
        return raw

    def _trip_from_status(self, raw: RawCapture, capture_id: int | None) -> None:
        """A capture that is not whole may have lost its TRIP frame: the
        firmware keeps its last trip in STATUS, so ask (best effort)."""
        if raw.trip is not None or capture_id is None:
            return
        try:
            last = self.status(1.0).get("last_trip")
        except GlowtraceError:
            return
        if isinstance(last, dict) and last.get("id") == capture_id:
            raw.trip = last
