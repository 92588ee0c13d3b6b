"""The reference tester's circuit, described once in code: every part and
every connection. From it come the netlist (KiCad's netlist format, for a
board layout), the bill of materials to order, and the drawing's labels
(draw_schematic.py); tests/test_netlist.py checks that the ngspice deck
(tester.cir with frontend.lib) has the same parts, values and connections,
so the drawing, the parts list and what is simulated cannot disagree.

    .venv/bin/python schematics/circuit.py      # writes tester-30v.net, tester-55v.net,
                                                # bom-30v.csv, bom-55v.csv

Values, ratings and example parts live in parts.csv (per variant); this file
says how the parts connect. Net names are the board's: RAIL is the heater
supply after the fuse, HS/HA/HB the socket buses (supply, section A return,
section B return), DA/DB the switches' drains, SA/SB the shunts' tops."""

import csv
import sys
from dataclasses import dataclass, field
from pathlib import Path

HERE = Path(__file__).resolve().parent
VARIANTS = ("30V", "55V")


@dataclass
class Part:
    ref: str
    pins: dict                      # pin name -> net
    spice: list = field(default_factory=list)  # (deck element, {pin: element node index})


def _section(s: str, n: int, adc: int, gpio: int) -> list[Part]:
    """One heater section's switch, shunt and current channel (A: n=1)."""
    q, rs, u = f"Q{n}", f"RS{n}", f"U{n}"
    r_gate, r_pd, r_in = f"R{n}", f"R{n + 2}", f"R{n + 4}"
    r_f, c_f, d_cl = f"R{n + 6}", f"C{n + 2}", f"D{n + 1}"
    sw, ch = f"Xsw{s}", f"Xch{s}"
    d, sa, g, gd = f"D{s}", f"S{s}", f"G{s}", f"GD{s}"
    return [
        Part(r_in, {"1": f"SW{s}_IN", "2": "GND"}, [(f"{sw}.Rin", {"1": 0, "2": 1})]),
        Part(r_gate, {"1": gd, "2": g}, [(f"{sw}.Rgate", {"1": 0, "2": 1})]),
        Part(r_pd, {"1": g, "2": sa}, [(f"{sw}.Rpd", {"1": 0, "2": 1})]),
        Part(q, {"D": d, "G": g, "S": sa}, [(f"{sw}.M1", {"D": 0, "G": 1, "S": 2})]),
        Part(rs, {"1": sa, "2": "GND", "S+": f"SENSE{s}_P", "S-": f"SENSE{s}_N"},
             [(f"Rsh{s}", {"1": 0, "2": 1})]),
        Part(u, {"IN+": f"SENSE{s}_P", "IN-": f"SENSE{s}_N", "SEL": "RANGE",
                 "OUT": f"AMP{s}", "VS": "3V3", "GND": "GND"}),
        Part(r_f, {"1": f"AMP{s}", "2": f"ADC{adc}"}, [(f"{ch}.Rf", {"1": 0, "2": 1})]),
        Part(c_f, {"1": f"ADC{adc}", "2": "GND"}, [(f"{ch}.Cf", {"1": 0, "2": 1})]),
        # BAT54S: 1 anode of the lower diode, 2 cathode of the upper, 3 the middle
        Part(d_cl, {"1": "GND", "2": "3V3", "3": f"ADC{adc}"},
             [(f"{ch}.Dlo", {"1": 0, "3": 1}), (f"{ch}.Dhi", {"3": 0, "2": 1})]),
    ]


def parts() -> list[Part]:
    """Every part of the board and the sockets, with its connections."""
    p = [
        Part("J1", {"1": "VIN", "2": "GND"}),
        Part("F1", {"1": "VIN", "2": "RAIL"}, [("Rfuse", {"1": 0, "2": 1})]),
        Part("C1", {"+": "RAIL", "-": "GND"}, [("C1", {"+": 0, "-": 1})]),
        Part("D1", {"K": "RAIL", "A": "GND"}, [("Dtvs", {"A": 0, "K": 1})]),
        # the voltage channel, at the rail (the socket's supply bus)
        Part("R9", {"1": "RAIL", "2": "ADC2"}, [("XchV.Rtop", {"1": 0, "2": 1})]),
        Part("R10", {"1": "ADC2", "2": "GND"}, [("XchV.Rbot", {"1": 0, "2": 1})]),
        Part("C5", {"1": "ADC2", "2": "GND"}, [("XchV.Cf", {"1": 0, "2": 1})]),
        Part("D4", {"1": "GND", "2": "3V3", "3": "ADC2"},
             [("XchV.Dlo", {"1": 0, "3": 1}), ("XchV.Dhi", {"3": 0, "2": 1})]),
        # the gate driver (5 V from USB), both channels
        Part("U5", {"INA": "SWA_IN", "INB": "SWB_IN", "OUTA": "GDA", "OUTB": "GDB",
                    "VDD": "5V", "GND": "GND"}),
        *_section("A", 1, 0, 14),
        *_section("B", 2, 1, 15),
        # the room sensor on the socket plate
        Part("U3", {"GND": "GND", "DQ": "ONEWIRE", "VDD": "3V3"}),
        Part("R11", {"1": "ONEWIRE", "2": "3V3"}),
        # the controller board (Raspberry Pi Pico pin names)
        Part("U4", {"GP13": "RANGE", "GP14": "SWA_IN", "GP15": "SWB_IN", "GP22": "ONEWIRE",
                    "GP26": "ADC0", "GP27": "ADC1", "GP28": "ADC2", "3V3_OUT": "3V3",
                    "VBUS": "5V", "GND": "GND"}),
        # sockets and their wiring selectors: HS the supply bus (RAIL), HA and
        # HB the sections' returns to the switches' drains
        Part("S1", {"C1": "X1_9", "T1": "HS",               # 9 to supply: CT wiring
                    "C2": "X1_4", "T2a": "HA", "T2b": "HS",  # 4: A (CT) or supply (single)
                    "C3": "X1_5", "T3a": "HB", "T3b": "HA"}),  # 5: B (CT) or A (single)
        Part("X1", {"4": "X1_4", "5": "X1_5", "9": "X1_9"}),
        Part("X2", {"3": "HS", "4": "HA"}),
        Part("S2", {"C1": "HS", "P1": "X3_2", "P2": "X3_7", "P3": "X3_2",   # 2-7, 7-8, 2-8
                    "C2": "HA", "Q1": "X3_7", "Q2": "X3_8", "Q3": "X3_8"}),
        Part("X3", {"2": "X3_2", "7": "X3_7", "8": "X3_8"}),
        Part("X4", {"1": "HS", "4": "HA"}),
        Part("W1", {"HS": "HS", "RAIL": "RAIL", "HA": "HA", "DA": "DA", "HB": "HB",
                    "DB": "DB"}),
    ]
    return p


# the socket plate's wires: HS to the rail, HA and HB to the drains; the deck
# joins them (its heater sits between rail and da/db)
JOINED = {"HS": "RAIL", "HA": "DA", "HB": "DB"}


def rows(variant: str) -> dict:
    """parts.csv rows of a variant, by reference (W1, the plate's wiring, is
    not a part to order)."""
    with open(HERE / "parts.csv") as f:
        return {r["reference"]: r for r in csv.DictReader(f)
                if r["variant"] in ("all", variant)}


def nets() -> dict:
    """net -> [(ref, pin)], sorted."""
    out: dict = {}
    for p in parts():
        for pin, net in p.pins.items():
            out.setdefault(net, []).append((p.ref, pin))
    return {n: sorted(v) for n, v in sorted(out.items())}


def _q(text: str) -> str:
    return '"' + text.replace('"', "'") + '"'


def netlist(variant: str) -> str:
    """The circuit in KiCad's netlist format (S-expressions): components with
    value and footprint, and nets with their nodes. Footprints are the
    parts list's first choice, named as in KiCad's libraries without the
    library prefix: assign them in KiCad's footprint tool."""
    info = rows(variant)
    lines = ["(export (version \"E\")",
             f"  (design (source \"glowtrace schematics/circuit.py\") (tool \"glowtrace\")"
             f" (comment \"reference tester, {variant} variant\"))", "  (components"]
    for p in parts():
        if p.ref == "W1":
            continue
        r = info[p.ref]
        fp = r["footprint"].split(" / ")[0]
        lines.append(f"    (comp (ref {_q(p.ref)}) (value {_q(r['value'])}) "
                     f"(footprint {_q(fp)}) (fields (field (name \"Example\") "
                     f"{_q(r['example_parts'])})))")
    lines.append("  )")
    lines.append("  (nets")
    for code, (net, nodes) in enumerate(nets().items(), 1):
        body = " ".join(f"(node (ref {_q(ref)}) (pin {_q(pin)}))" for ref, pin in nodes
                        if ref != "W1")
        lines.append(f"    (net (code {code}) (name {_q(net)}) {body})")
    lines.append("  )")
    lines.append(")")
    return "\n".join(lines) + "\n"


def bom(variant: str) -> list[list[str]]:
    """The bill of materials to order: one line per distinct part, with its
    quantity and references."""
    info = rows(variant)
    groups: dict = {}
    for p in parts():
        if p.ref == "W1":
            continue
        r = info[p.ref]
        key = (r["value"], r["rating"], r["tolerance"], r["example_parts"], r["package"])
        groups.setdefault(key, []).append(p.ref)
    out = [["qty", "references", "value", "rating", "tolerance", "example part", "package",
            "footprint"]]
    for (value, rating, tol, example, package), refs in groups.items():
        out.append([str(len(refs)), " ".join(refs), value, rating, tol, example, package,
                    info[refs[0]]["footprint"]])
    return out


def write_all(folder: Path = HERE) -> list[Path]:
    written = []
    for v in VARIANTS:
        net = folder / f"tester-{v.lower()}.net"
        net.write_text(netlist(v))
        b = folder / f"bom-{v.lower()}.csv"
        with open(b, "w", newline="") as f:
            csv.writer(f).writerows(bom(v))
        written += [net, b]
    return written


if __name__ == "__main__":
    for path in write_all(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE):
        print("wrote", path)
