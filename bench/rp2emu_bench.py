"""The rp2's time budget, measured on the emulated RP2040 (not a test):
    .venv/bin/python bench/rp2emu_bench.py
Installs the firmware on a fresh emulated chip (fixtures_hw/rp2emu), feeds
its converter a fast heater's switch-on from the gate's rising edge, runs one
capture through the real board layer, and prints:
  - how long the capture took in emulated and in wall time (the emulator's
    speed against the real chip);
  - per phase of the schedule: the converter's rate against its 500 kS/s,
    and the share of the phase's time actually sampled: between two chunks
    the CPU sends blocks over USB and runs the supervisor and the end rule,
    the converter is idle and the gap is time the curve is not seen (and not
    watched for over-current);
  - the reaction to a short in the dense phase, at ten points across a
    fast-phase chunk and the gap after it, and in the mid phase, from the
    gate's GPIO events: how close the watch keeps up, inside a chunk and
    between two.
Needs what tests/test_rp2emu.py needs (node, `npm ci` in fixtures_hw/rp2emu,
the MicroPython bundle). Takes two to four minutes."""

import json
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT / "host"))
sys.path.insert(0, str(ROOT / "fixtures_hw" / "rp2emu"))

import emulator  # noqa: E402

FE = json.loads((ROOT / "schematics" / "frontend.json").read_text())
GATE = FE["gpio"]["switch_a"]
CH = {c["name"]: c["adc_input"] for c in FE["channels"]}
ADC_MAX_SPS = 500_000  # RP2040 datasheet, ADC chapter: 48 MHz / 96 cycles
WAIT_S = 120.0


def codes(volts):
    adc = FE["adc"]
    return np.clip(np.round(np.asarray(volts) / adc["vref_v"] * (1 << adc["bits"])), 0, 4095)


def feed_fast_heater(emu):
    from glowtrace.analysis.thermal import ThermalModel
    fast = ThermalModel(r20=6.2, k=1.0, t_amb_k=295.15, r_hot=42.0, p_hot=6.3 ** 2 / 42.0,
                        dt_ws=140.0, tau_w=0.05, tau_s=0.4)
    low = FE["current_ranges"]["low"]
    t, _, i, _ = fast.in_circuit(6.3, low["shunt_ohm"] + FE["switch"]["rds_on_ohm"],
                                 t_end=10.0, n=400)
    feed(emu, (t * 1e6).tolist(), codes(i / low["amps_per_volt"]).tolist())


def feed(emu, t_us, code):
    table = {"ch": CH["ia"], "gate": GATE, "off": 0, "t_us": list(t_us), "code": list(code)}
    assert emu.command("adctable " + json.dumps(table)) == "ok"
    v = int(codes(6.3 / FE["voltage_divider"]["volts_per_volt"]))
    assert emu.command(f"adc {CH['v']} {v}") == "ok"


def phase_budget(raw) -> list[dict]:
    """Per phase: sets, converter rate, sampled share of the phase's time,
    the largest gap between chunks."""
    names = {i + 1: ph[0] for i, ph in enumerate(raw.phases)}
    nch = len(raw.channels)
    out = []
    blocks = sorted((b for b in raw.blocks if b.phase > 0), key=lambda b: b.t_start_us)
    for no, name in names.items():
        bs = [b for b in blocks if b.phase == no]
        if not bs:
            continue
        sampled = sum(b.n_sets * b.interval_us for b in bs)
        span = bs[-1].t_start_us + bs[-1].n_sets * bs[-1].interval_us - bs[0].t_start_us
        gaps = [b2.t_start_us - (b1.t_start_us + b1.n_sets * b1.interval_us)
                for b1, b2 in zip(bs, bs[1:])]
        rate = nch * bs[0].oversample / (bs[0].interval_us * 1e-6)
        out.append({"phase": name, "sets": sum(b.n_sets for b in bs),
                    "interval_us": bs[0].interval_us, "oversample": bs[0].oversample,
                    "converter_share": rate / ADC_MAX_SPS,
                    "sampled_share": sampled / span if span else 1.0,
                    "largest_gap_us": max(gaps) if gaps else 0})
    return out


def short_reaction(emu, at_us: int) -> int:
    from glowtrace.tester.driver import connect
    feed(emu, [0, at_us, at_us + 1, 1e8], [1500, 1500, 4095, 4095])
    since = len(emu.events)
    with connect(emu.port, timeout=WAIT_S) as t:
        raw = t.capture("BENCH", "A", {"max_s": 3})
    assert raw.trip_cause == "over_current", raw.trip
    ev = emu.gpio_events(GATE, since)
    on = next(t for t, s in ev if s == "High")
    off = next(t for t, s in ev if s == "Low" and t > on)
    return off - on - at_us


def main() -> int:
    why = emulator.missing()
    if why:
        print("cannot run:", why)
        return 1
    from glowtrace.cli import main as cli
    from glowtrace.tester.driver import connect
    with tempfile.TemporaryDirectory() as d, emulator.Rp2Emulator(Path(d) / "flash.img") as emu:
        emu.command(f"setin {FE['gpio']['ambient_1wire']} 1")
        assert cli(["firmware", "install", "--port", emu.port, "--wait-s", str(WAIT_S),
                    "--json"]) == 0
        feed_fast_heater(emu)
        with connect(emu.port, timeout=WAIT_S) as t:
            emu_0, wall_0 = emu.emulated_s(), time.monotonic()
            raw = t.capture("BENCH", "A", {"max_s": 8})
            emu_s, wall_s = emu.emulated_s() - emu_0, time.monotonic() - wall_0
        print(f"one capture ({raw.end_reason}, {raw.n_sets} sets, channels {raw.channels}):")
        print(f"  {emu_s:.2f} s emulated, {wall_s:.1f} s wall: the emulator runs at "
              f"{emu_s / wall_s:.2f} of real time")
        print(f"  {'phase':6} {'sets':>6} {'interval':>9} {'x':>3} {'converter':>10} "
              f"{'sampled':>8} {'largest gap':>12}")
        for p in phase_budget(raw):
            print(f"  {p['phase']:6} {p['sets']:6d} {p['interval_us']:7d}us {p['oversample']:3d} "
                  f"{p['converter_share']:9.0%} {p['sampled_share']:8.1%} "
                  f"{p['largest_gap_us'] / 1000:9.1f} ms")
        # a short in the dense phase, at points across a fast-phase chunk and
        # the gap after it (about 45 ms on the emulated chip), and in the mid
        # phase: in a chunk the transfer's watch sees it; in a gap, the reading
        # before each frame sent
        fast = [100000 + 5000 * k for k in range(10)]
        for at in [3000, *fast, 700000]:
            print(f"short at {at / 1000:g} ms: gate low {short_reaction(emu, at)} us after it")
    return 0


if __name__ == "__main__":
    sys.exit(main())
