"""`glowtrace selftest`: the tester checks itself with a dummy load the user
fits in the socket (a power resistor across each section): the link, the
board's clock, every channel, each switch, both current ranges, and the
trips. Each check says in plain words what failed and what to look at."""

import json
import time
from dataclasses import dataclass

from . import protocol
from .calibration import gain_offset, nominal_scale, r_path
from ..errors import GlowtraceError
from .driver import CaptureInterrupted, Tester


@dataclass
class Check:
    name: str
    ok: bool
    detail: str
    advice: str = ""

    def as_dict(self) -> dict:
        return self.__dict__.copy()


CHANNEL_PINS = {"ia": "ADC0 (GPIO26)", "ib": "ADC1 (GPIO27)", "v": "ADC2 (GPIO28)"}
SWITCHES = {"A": "Q1 and its gate drive from GPIO14", "B": "Q2 and its gate drive from GPIO15"}
AMPS = {"A": "U1", "B": "U2"}


class Readings:
    """A measurement in physical units with the board's calibration."""

    def __init__(self, tester: Tester, m: dict, zero: dict | None = None):
        fe, cal = tester.hello["frontend"], tester.hello.get("calibration")
        self.values = {}
        for k, name in enumerate(m["channels"]):
            gain, off = gain_offset(cal, name, m["range"])
            if zero is not None and name in ("ia", "ib"):
                off = zero.get(name, off)
            self.values[name] = (m["means"][k] - off) * nominal_scale(fe, name, m["range"]) * gain
        self.tripped = m["tripped"]

    def __getitem__(self, name):
        return self.values[name]


def _link(t: Tester) -> list[Check]:
    out = []
    worst = 0.0
    for _ in range(10):
        s = time.monotonic()
        t.status()
        worst = max(worst, time.monotonic() - s)
    out.append(Check("link round trip", worst < 0.5, f"10 status requests, slowest "
                     f"{1000 * worst:.0f} ms", "a slow or lossy USB link: try another cable or port"))
    t.link.port.write(b"\x13\x37 not a frame \xff\x00")
    try:
        t.status()
        out.append(Check("link recovers from garbage", True, "status answered after garbage"))
    except GlowtraceError as e:
        out.append(Check("link recovers from garbage", False, str(e),
                         "the firmware did not resynchronise: reinstall it"))
    return out


def _clock(t: Tester) -> Check:
    a = t.status()["ms"]
    h0 = time.monotonic()
    time.sleep(1.0)
    b = t.status()["ms"]
    h1 = time.monotonic()
    rate = ((b - a) & 0x3FFFFFFF) / (1000 * (h1 - h0))
    return Check("board clock", abs(rate - 1) < 0.02, f"board ms over host ms: {rate:.4f}",
                 "the board's clock runs off: check its crystal")


def _channels(t: Tester, load_ohm: float, sections: tuple) -> list[Check]:
    out = []
    fe = t.hello["frontend"]
    idle = t.measure("", "low", sets=100)
    zero = {n: idle["means"][k] for k, n in enumerate(idle["channels"]) if n in ("ia", "ib")}
    r = Readings(t, idle)
    v_idle = r["v"]
    fs = fe["adc"]["vref_v"] * fe["current_ranges"]["low"]["amps_per_volt"]
    ok_v = 1.0 < v_idle < fe["limits"]["supply_v_max"] * 1.05
    out.append(Check("heater supply voltage", ok_v, f"{v_idle:.2f} V at the socket",
                     "no heater supply: is it switched on and connected to J1 (check F1)? If "
                     "a meter shows voltage there, check the divider R9/R10 and "
                     + CHANNEL_PINS["v"]))
    for s in sections:
        name = "i" + s.lower()
        offset_a = (idle["means"][idle["channels"].index(name)]) * nominal_scale(fe, name, "low")
        out.append(Check(f"section {s} current channel at rest", abs(offset_a) < 0.03 * fs,
                         f"{offset_a:+.4f} A with the heater off",
                         f"a large reading with no current: check amplifier {AMPS[s]}'s supply "
                         f"and the shunt wiring of section {s}"))
    for s in sections:
        name = "i" + s.lower()
        other = "ib" if name == "ia" else "ia"
        m = t.measure(s, "low", sets=100, settle_ms=20)
        on = Readings(t, m, zero)
        got = on[name]
        if not ok_v:
            out.append(Check(f"section {s} switch", got > 0.02,
                             f"{got:.3f} A with section {s} on; its size cannot be checked "
                             "without the voltage channel",
                             f"is the dummy load fitted across section {s}? Then check "
                             f"{SWITCHES[s]}"))
            continue
        expect = on["v"] / (load_ohm + r_path(fe, "low"))
        sag = v_idle - on["v"]
        if got > 0.95 * expect and got < 1.05 * expect:
            out.append(Check(f"section {s} switch and current channel", True,
                             f"{got:.3f} A through the {load_ohm:g} ohm load, expected "
                             f"{expect:.3f} A"))
        elif got < 0.05 * expect and sag > 0.002 * v_idle:
            out.append(Check(f"section {s} current channel", False,
                             f"the supply sags {sag:.2f} V (current flows) but the channel "
                             f"reads {got:.3f} A",
                             f"check amplifier {AMPS[s]}, its filter and the wire to "
                             f"{CHANNEL_PINS[name]}"))
        elif got < 0.05 * expect:
            out.append(Check(f"section {s} switch", False,
                             f"no current with section {s} switched on (expected {expect:.3f} A) "
                             "and the supply does not sag",
                             f"is the dummy load fitted across section {s}? Then check "
                             f"{SWITCHES[s]}; if a meter shows current, check amplifier "
                             f"{AMPS[s]} and {CHANNEL_PINS[name]}"))
        else:
            out.append(Check(f"section {s} current channel", False,
                             f"{got:.3f} A, expected {expect:.3f} A ({100 * (got / expect - 1):+.0f} %)",
                             f"check the load's value, then calibrate; a large error points "
                             f"at the shunt of section {s} or amplifier {AMPS[s]}'s gain"))
        if other in on.values and len(sections) > 1:
            leak = on[other]
            out.append(Check(f"section {s} alone", abs(leak) < 0.05 * expect,
                             f"{leak:+.4f} A in the other section",
                             "current in the section that is off: check the socket wiring "
                             "and the other switch for a short"))
        if got < 0.05 * expect:
            continue  # the range check needs current in this channel
        hi = Readings(t, t.measure(s, "high", sets=100, settle_ms=20), None)
        hi_zero = Readings(t, t.measure("", "high", sets=50, settle_ms=0), None)
        got_hi = hi[name] - hi_zero[name]
        out.append(Check(f"section {s} high range", abs(got_hi / max(got, 1e-9) - 1) < 0.1,
                         f"{got_hi:.3f} A on the high range, {got:.3f} A on the low",
                         "the ranges disagree: check the range select from GPIO13 and the "
                         f"gain setting of amplifier {AMPS[s]}"))
    return out


def _trip(t: Tester, name: str, params: dict, want: str, advice: str,
          silent: bool = False) -> Check:
    try:
        if silent:
            raw = _silent_capture(t, params)
        else:
            raw = t.capture(None, "A", params)
    except CaptureInterrupted as e:
        raw = e.raw
    off = t.status()["heater"] == 0
    got = (raw.trip or {}).get("cause")
    ok = got == want and off
    detail = f"tripped on {got or 'nothing'}" + (f" after {raw.trip['at_us']} us" if raw.trip else "")
    detail += "; heater off" if off else "; HEATER STILL ON"
    return Check(f"trip: {name}", ok, detail, advice)


def _silent_capture(t: Tester, params: dict):
    """Start a capture and then send nothing, as a crashed host would."""
    from .raw import RawCapture
    raw = RawCapture(tube=None, section="A", port="", hello=t.hello)
    t.link.send(protocol.CAPTURE, json.dumps(dict(params, section="A")).encode())
    deadline = time.monotonic() + 10
    while time.monotonic() < deadline:
        f = t.link.receive(0.2)
        if f is not None and f.mtype == protocol.TRIP:
            raw.trip = f.json()
        if f is not None and f.mtype == protocol.CAPTURE_END:
            break
    return raw


def run(t: Tester, load_ohm: float, progress=None) -> list[Check]:
    """All checks, in order; stops early only when the link itself fails."""
    if not 0.5 <= load_ohm <= 100:
        raise GlowtraceError("the dummy load should be 0.5..100 ohm (4.7 ohm, 10 W suits)")
    checks = []

    def add(c):
        checks.extend(c if isinstance(c, list) else [c])
        if progress:
            for x in (c if isinstance(c, list) else [c]):
                progress(x)
    hello = t.identify()
    add(Check("handshake", True, f"firmware {hello['firmware']}, protocol {hello['protocol']}, "
                                 f"board {hello['board']}"))
    add(_link(t))
    add(_clock(t))
    sections = ("A", "B") if "ib" in hello["channels"] else ("A",)
    add(_channels(t, load_ohm, sections))
    # what the load draws, read on section A, for the trip thresholds
    i = Readings(t, t.measure("A", "low", sets=20, settle_ms=20))["ia"]
    if i < 0.05:
        add(Check("trips", False, "no current through the dummy load in section A: the trips "
                                  "cannot be tested", "fix the section A failures above first"))
        return checks
    add(_trip(t, "over-current", {"trip_a": 0.5 * i, "max_s": 1},
              "over_current", "the firmware did not switch off on over-current: reinstall it"))
    add(_trip(t, "open heater", {"open_a": min(2 * i, 3.0), "max_s": 1},
              "open_heater", "the open-heater check did not trip: reinstall the firmware"))
    add(_trip(t, "maximum on-time", {"max_on_s": 0.2, "max_s": 5, "settle_min_s": 10},
              "max_on_time", "the on-time limit did not trip: reinstall the firmware"))
    add(_trip(t, "host silent", {"silence_ms": 300, "max_s": 300, "settle_min_s": 299},
              "host_silent", "the heater stayed on without the host: reinstall the firmware",
              silent=True))
    return checks
