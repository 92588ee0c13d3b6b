"""Draws the tester schematic (tester.svg) from code with schemdraw, so the
drawing can be regenerated and checked like everything else:
    .venv/bin/python schematics/draw_schematic.py [OUT.svg]
One heater section is drawn; section B repeats it (Q2, RS2, U2, R8, C4, D3)
on GPIO15 and ADC1. Values and ratings: parts.csv; numbers: frontend.json."""

import sys
from pathlib import Path

import schemdraw
import schemdraw.elements as elm

HERE = Path(__file__).resolve().parent


def draw(path: Path) -> None:
    schemdraw.use("svg")
    with schemdraw.Drawing(show=False) as d:
        d.config(fontsize=10, unit=2.0)
        # supply input, fuse, rail; bulk capacitor and TVS to ground
        d += elm.Dot(open=True).at((0, 0)).label("J1 + 2-30 V DC", loc="left")
        d += elm.Fuse().at((0, 0)).to((3, 0)).label("F1 10 A T")
        d += elm.Line().at((3, 0)).to((16, 0))
        d += elm.Dot().at((4, 0))
        d += elm.Capacitor(polar=True).at((4, 0)).to((4, -2.5)).label("C1 1000 uF", loc="bottom")
        d += elm.Ground().at((4, -2.5))
        d += elm.Dot().at((6, 0))
        d += elm.DiodeTVS().at((6, -2.5)).to((6, 0)).label("D1 33 V", loc="bottom")
        d += elm.Ground().at((6, -2.5))
        # voltage channel: divider above the rail
        d += elm.Dot().at((8, 0))
        d += elm.Line().at((8, 0)).to((8, 3))
        d += elm.Resistor().at((8, 3)).to((11, 3)).label("R9 100 k")
        d += elm.Dot().at((11, 3))
        d += elm.Resistor().at((11, 3)).to((11, 1.2)).label("R10 10 k", loc="bottom")
        d += elm.Ground().at((11, 1.2))
        d += elm.Line().at((11, 3)).to((13, 3))
        d += elm.Dot().at((13, 3))
        d += elm.Capacitor().at((13, 3)).to((13, 1.2)).label("C5 910 p", loc="bottom")
        d += elm.Ground().at((13, 1.2))
        d += elm.Line().at((13, 3)).to((15, 3))
        d += elm.Dot(open=True).at((15, 3)).label("ADC2 / GPIO28 (v), clamps D4", loc="right")
        # heater section A from the centre tap, low-side switch, shunt
        d += elm.Dot().at((16, 0)).label("socket centre tap (X1 pin 9, CT wiring)", loc="top")
        d += elm.Resistor().at((16, 0)).to((16, -3)).label("heater section A", loc="bottom")
        d += (q1 := elm.NFet(bulk=False).anchor("drain").at((16, -3)).label("Q1", loc="left"))
        sx, sy = q1.source
        d += elm.Line().at(q1.source).to((sx, -10))
        d += elm.Dot().at((sx, -10))
        d += elm.Resistor().at((sx, -10)).to((sx, -12.5)).label("RS1 10 m", loc="bottom")
        d += elm.Ground().at((sx, -12.5))
        # gate (on the right): gate resistor, pull-down, driver, GPIO
        gx, gy = q1.gate
        d += elm.Resistor().at((gx, gy)).to((gx + 3, gy)).label("R1 10")
        d += elm.Dot().at((gx + 3, gy))
        d += elm.Resistor().at((gx + 3, gy)).to((gx + 3, gy - 2.2)).label("R3 100 k",
                                                                           loc="bottom")
        d += elm.Ground().at((gx + 3, gy - 2.2))
        d += elm.Line().at((gx + 3, gy)).to((gx + 5, gy))
        d += elm.Ic(pins=[elm.IcPin(name="OUT", side="left"), elm.IcPin(name="IN", side="right")],
                    size=(2, 1.5)).anchor("OUT").at((gx + 5, gy)).label("U5 gate driver (5 V)",
                                                                          loc="top")
        d += elm.Line().at((gx + 7, gy)).to((gx + 9, gy))
        d += elm.Dot(open=True).at((gx + 9, gy)).label("GPIO14 (R5 100 k to ground)",
                                                        loc="right")
        # current channel: amplifier, anti-alias filter, clamp, ADC0
        d += elm.Line().at((sx, -10)).to((sx + 3, -10))
        d += (u1 := elm.Opamp().anchor("in2").at((sx + 3, -10)).right()
              .label("U1 x100 / x10", loc="center", ofst=(0, -1.3)))
        d += elm.Line().at(u1.in1).left(0.8)
        d += elm.Line().down(0.4).label("to RS1 low end", loc="left", fontsize=8)
        d += elm.Resistor().at(u1.out).right().label("R7 1 k")
        d += (adc := elm.Dot())
        d += elm.Capacitor().at(adc.center).down().label("C3 8.2 n", loc="bottom")
        d += elm.Ground()
        d += elm.Diode().at(adc.center).up().label("D2 to 3.3 V", loc="top")
        d += elm.Line().at(adc.center).right(1.5)
        d += elm.Dot(open=True).label("ADC0 / GPIO26 (ia)", loc="right")
        d += elm.Label().at((0, -15)).label(
            "U4 RP2040/RP2350: GPIO14 and GPIO15 switch sections A and B through U5; GPIO13 "
            "selects the current range of U1 and U2; GPIO22 reads the 1-Wire room sensor U3; "
            "USB to the host. Section B repeats section A: Q2, RS2, U2, R8, C4, D3, ADC1.",
            halign="left")
        d += elm.Label().at((0, -16)).label(
            "R3/R4 pull the gates and R5/R6 the driver inputs down: both heaters are off "
            "whenever the board is unpowered, in reset or crashed. Values: parts.csv.",
            halign="left")
        d.save(str(path))


if __name__ == "__main__":
    draw(Path(sys.argv[1]) if len(sys.argv) > 1 else HERE / "tester.svg")
