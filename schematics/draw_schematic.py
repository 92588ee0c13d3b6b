"""Draws the whole tester schematic from the circuit description
(circuit.py) and the parts list (parts.csv), so the drawing cannot disagree
with the netlist or with what ngspice simulates:
    .venv/bin/python schematics/draw_schematic.py     # tester.svg, tester.png,
                                                      # tester-55v.svg, tester-55v.png
Every part is drawn with its reference and value; its pins end in net names
(a connection is the same net name, as global labels in a schematic editor).
The parts are grouped by function, one block per row."""

import sys
from pathlib import Path

import schemdraw
import schemdraw.elements as elm

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))
import circuit  # noqa: E402

BLOCKS = [
    ("Heater supply input and protection (isolated, current-limited bench supply only)",
     ["J1", "F1", "C1", "D1"]),
    ("Voltage channel: the rail to ADC2 (GPIO28)", ["R9", "R10", "C5", "D4"]),
    ("Section A: low-side switch, shunt, current channel to ADC0 (GPIO26)",
     ["R5", "R1", "R3", "Q1", "RS1", "U1", "R7", "C3", "D2"]),
    ("Section B: the same to ADC1 (GPIO27)",
     ["R6", "R2", "R4", "Q2", "RS2", "U2", "R8", "C4", "D3"]),
    ("Gate driver (5 V from USB), controller board, room sensor",
     ["U5", "U4", "U3", "R11"]),
    ("Sockets and wiring selectors (socket plate); W1: the plate's heavy wires",
     ["X1", "S1", "X2", "S2", "X3", "X4", "W1"]),
]
NOTES = [
    "Range: GPIO13 (net RANGE) low = x100 (1 A/V, 3.3 A full scale), high = x10 (10 A/V, "
    "33 A full scale) in U1 and U2.",
    "S1 (B9A): CT = pin 9 to HS, 4 to HA, 5 to HB; single = 4 to HS, 5 to HA. "
    "S2 (octal): position 1 = 2-7, 2 = 7-8, 3 = 2-8 (supply pin - section pin).",
    "R3-R6 hold both gates low when the board is unpowered, in reset or crashed. "
    "Pins end in net names: the same name is one connection.",
]
PIN_GAP = 0.9  # units between pins of a box


def _tag(d, xy, net: str, left: bool):
    d += elm.Tag().at(xy).theta(180 if left else 0).label(net, fontsize=8)


def _two_pin(d, x, y, part, label):
    """A vertical two-pin symbol, its first pin's net on top."""
    kind = part.ref.rstrip("0123456789")
    pins = list(part.pins)
    top, bot = part.pins[pins[0]], part.pins[pins[1]]
    if kind == "D":  # the TVS: cathode on top (to the rail)
        top, bot = part.pins["K"], part.pins["A"]
        sym = elm.DiodeTVS().at((x, y - 2)).up()
    elif kind == "F":
        sym = elm.Fuse().at((x, y)).down()
    elif kind == "C":
        polar = "+" in part.pins
        if polar:
            top, bot = part.pins["+"], part.pins["-"]
        sym = elm.Capacitor(polar=polar).at((x, y)).down()
    else:
        sym = elm.Resistor().at((x, y)).down()
    d += sym.length(2).label(label, loc="bottom", fontsize=8, ofst=0.15)
    width = 1.0 + 0.14 * len(label)  # the label beside the symbol, at 8 pt
    d += elm.Line().at((x, y)).up(0.4)
    _tag(d, (x, y + 0.4), top, left=False)
    d += elm.Line().at((x, y - 2)).down(0.4)
    _tag(d, (x, y - 2.4), bot, left=False)
    return max(3.2, width)


def _fet(d, x, y, part, label):
    """The MOSFET: drain up, source down, gate to the right."""
    q = elm.NFet(bulk=False).anchor("drain").at((x + 0.8, y)).right()
    d += q
    d += elm.Line().at(q.drain).up(0.4)
    _tag(d, (q.drain[0], q.drain[1] + 0.4), part.pins["D"], left=False)
    d += elm.Line().at(q.source).down(0.5)
    _tag(d, (q.source[0], q.source[1] - 0.5), part.pins["S"], left=False)
    d += elm.Line().at(q.gate).right(0.4)
    _tag(d, (q.gate[0] + 0.4, q.gate[1]), part.pins["G"], left=False)
    d += elm.Label().at((q.source[0] - 0.4, q.source[1] - 1.5)).label(label, halign="left",
                                                                     fontsize=8)
    return max(6.0, 0.6 + 0.14 * len(label))


def _box(d, x, y, part, label):
    """A box with its pins: half on the left, half on the right."""
    names = list(part.pins)
    half = (len(names) + 1) // 2
    left, right = names[:half], names[half:]
    h = max(len(left), len(right)) * PIN_GAP + 0.4
    # room for the longest pin names of both sides side by side (7 pt)
    w = max(2.2, 0.9 + 0.2 * (max(map(len, left)) + max(map(len, right or [""]))))
    # anchors named apart from the pins' names: a pin called "1" or "2"
    # would clash with the box's own anchors
    pins = ([elm.IcPin(name=n, side="left", slot=f"{i + 1}/{len(left)}", anchorname=f"p_{n}")
             for i, n in enumerate(left)]
            + [elm.IcPin(name=n, side="right", slot=f"{i + 1}/{len(right)}",
                         anchorname=f"p_{n}") for i, n in enumerate(right)])
    # .right(): the drawing's last direction (down, from a resistor) would turn the box
    ic = elm.Ic(pins=pins, size=(w, h), pinspacing=PIN_GAP, lblsize=7).at((x + 1.4, y - h)).right()
    ic = ic.label(label, loc="top", fontsize=8)
    d += ic
    for n in left:
        a = getattr(ic, f"p_{n}")
        d += elm.Line().at(a).left(0.3)
        _tag(d, (a[0] - 0.3, a[1]), part.pins[n], left=True)
    for n in right:
        a = getattr(ic, f"p_{n}")
        d += elm.Line().at(a).right(0.3)
        _tag(d, (a[0] + 0.3, a[1]), part.pins[n], left=False)
    return w + 4.2, h


def _label(part, rows) -> str:
    if part.ref == "W1":
        return "W1 plate wiring"
    # the value's first clause: the full requirement is in parts.csv
    return f"{part.ref} {rows[part.ref]['value'].split(',')[0]}"


def draw(path: Path, variant: str = "30V") -> None:
    """Draw the variant's schematic to path (.svg or .png)."""
    schemdraw.use("matplotlib" if path.suffix == ".png" else "svg")
    rows = circuit.rows(variant)
    parts = {p.ref: p for p in circuit.parts()}
    drawn = [r for _, refs in BLOCKS for r in refs]
    missing = set(parts) - set(drawn)
    if missing:
        raise ValueError(f"parts not placed in any block: {sorted(missing)}")
    with schemdraw.Drawing(show=False) as d:
        d.config(fontsize=9, unit=2.0, margin=1.0)
        d += elm.Label().at((0, 2.5)).label(
            f"glowtrace reference tester, {variant} variant: the whole circuit "
            "(schematics/circuit.py; values from parts.csv)", halign="left", fontsize=12)
        y = 0.0
        for title, refs in BLOCKS:
            d += elm.Label().at((0, y)).label(title, halign="left", fontsize=10)
            y -= 1.2
            x, row_h = 0.5, 3.2
            for ref in refs:
                p = parts[ref]
                label = _label(p, rows)
                if ref.startswith("Q"):
                    x += _fet(d, x, y, p, label)
                elif len(p.pins) == 2:
                    x += _two_pin(d, x + 0.6, y, p, label) + 0.6
                else:
                    w, h = _box(d, x, y, p, label)
                    x += w + 1.2
                    row_h = max(row_h, h + 0.8)
            y -= row_h + 1.6
        for note in NOTES:
            d += elm.Label().at((0, y)).label(note, halign="left", fontsize=8)
            y -= 0.7
        d.save(str(path), dpi=110) if path.suffix == ".png" else d.save(str(path))


def draw_all(folder: Path = HERE) -> list[Path]:
    out = []
    for variant in circuit.VARIANTS:
        stem = "tester" if variant == "30V" else "tester-55v"
        for ext in (".svg", ".png"):
            p = folder / (stem + ext)
            draw(p, variant)
            out.append(p)
    return out


if __name__ == "__main__":
    for p in draw_all(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE):
        print("wrote", p)
