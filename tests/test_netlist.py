"""One source for the circuit (schematics/circuit.py): the ngspice deck
(tester.cir with frontend.lib, flattened here) has the same parts, values and
connections as the netlist; the generated netlists and bills of materials
are the ones committed; every part can be ordered."""

import csv
import re
import sys

import pytest

from spice import SCHEMATICS

sys.path.insert(0, str(SCHEMATICS))
import circuit  # noqa: E402

# deck elements that stand for something that is not a part on the list
MODEL_ONLY = {
    "Rsrc": "the bench supply's source and lead resistance",
    "RheatA": "the tube's heater, section A", "RheatB": "the tube's heater, section B",
    "XswA.Rdrv": "U5's output resistance", "XswB.Rdrv": "U5's output resistance",
    "XchA.Ramp": "U1's output resistance", "XchB.Ramp": "U2's output resistance",
    "XchA.Rpin": "the converter pin's input resistance (U4)",
    "XchB.Rpin": "the converter pin's input resistance (U4)",
}
# parts with no element in the deck, and why
NOT_SIMULATED = {
    "J1": "a terminal", "U1": "behavioural (XchA.Bamp)", "U2": "behavioural (XchB.Bamp)",
    "U5": "behavioural (XswA.Bdrv, XswB.Bdrv)", "U3": "the room sensor",
    "R11": "the sensor's pull-up", "U4": "the controller (its pins are the deck's sources)",
    "S1": "a wiring selector", "S2": "a wiring selector", "X1": "a socket", "X2": "a socket",
    "X3": "a socket", "X4": "a socket", "W1": "the socket plate's wires",
}
# a fuse is simulated by its cold resistance: its value is not a resistance
VALUE_EXEMPT = {"F1"}

SI = {"f": 1e-15, "p": 1e-12, "n": 1e-9, "u": 1e-6, "m": 1e-3, "k": 1e3, "meg": 1e6, "g": 1e9}
UNITS = {"pf": 1e-12, "nf": 1e-9, "uf": 1e-6, "mohm": 1e-3, "ohm": 1.0, "kohm": 1e3,
         "Mohm": 1e6}


def spice_value(text: str) -> float:
    m = re.fullmatch(r"([-+0-9.eE]+)(meg|[fpnumkg])?\w*", text.strip(), re.I)
    assert m, text
    return float(m.group(1)) * SI.get((m.group(2) or "").lower(), 1.0)


def part_value(text: str) -> float:
    m = re.match(r"([0-9.]+)\s*(pF|nF|uF|mohm|kohm|Mohm|ohm)\b", text)
    assert m, text
    unit = m.group(2) if m.group(2) == "Mohm" else m.group(2).lower()
    return float(m.group(1)) * UNITS[unit]


def _lines(text: str) -> list[str]:
    out = []
    for raw in text.splitlines():
        line = raw.split(";")[0].rstrip()
        if not line.strip() or line.lstrip().startswith("*"):
            continue
        if line.startswith("+") and out:
            out[-1] += " " + line[1:]
        else:
            out.append(line.strip())
    return out


def subcircuits() -> dict:
    subs, cur = {}, None
    for line in _lines((SCHEMATICS / "frontend.lib").read_text()):
        tok = line.split()
        if tok[0].lower() == ".subckt":
            ports = [t for t in tok[2:] if "=" not in t]
            params = dict(t.split("=") for t in tok[2:] if "=" in t)
            cur = subs[tok[1]] = {"ports": ports, "params": params, "body": []}
        elif tok[0].lower() == ".ends":
            cur = None
        elif cur is not None:
            cur["body"].append(tok)
    return subs


def flat_deck() -> dict:
    """element path -> (kind, nodes, value or model) of the whole tester deck."""
    subs = subcircuits()
    out = {}
    top: dict = {}
    in_control = False
    for line in _lines((SCHEMATICS / "tester.cir").read_text()):
        tok = line.split()
        low = tok[0].lower()
        if low == ".param":
            top.update(t.split("=") for t in tok[1:])
            continue
        if low == ".control":
            in_control = True
        if in_control or low.startswith("."):
            if low == ".endc":
                in_control = False
            continue
        if low.startswith("x"):
            nodes = [t for t in tok[1:] if "=" not in t]
            name, ports = nodes[-1], nodes[:-1]
            sub = subs[name]
            params = dict(sub["params"], **dict(t.split("=") for t in tok[1:] if "=" in t))
            where = dict(zip(sub["ports"], ports))
            for el in sub["body"]:
                _add(out, f"{tok[0]}.{el[0]}", el, lambda n: "0" if n == "0" else
                     where.get(n, f"{tok[0]}.{n}"), params)
        else:
            _add(out, tok[0], tok, lambda n: n, top)
    return out


def _add(out, path, tok, node, params):
    kind = tok[0][0].upper()
    n = {"R": 2, "C": 2, "D": 2, "M": 4, "V": 2, "I": 2, "B": 2}.get(kind)
    if n is None:
        return
    nodes = [node(t) for t in tok[1:1 + n]]
    value = tok[1 + n] if len(tok) > 1 + n else ""
    m = re.fullmatch(r"\{(\w+)\}", value)
    if m:
        value = params[m.group(1)]
    out[path] = (kind, nodes, value)


KIND = {"R": "R", "C": "C", "D": "D", "Q": "M", "F": "R"}


def test_the_deck_has_the_netlists_parts_values_and_connections():
    deck = flat_deck()
    rows = circuit.rows("30V")  # the deck is the 30 V build
    net_to_node, node_to_net = {}, {}
    claimed = set()
    for p in circuit.parts():
        if not p.spice:
            assert p.ref in NOT_SIMULATED, f"{p.ref} is neither simulated nor said why not"
            continue
        for element, pins in p.spice:
            assert element in deck, f"{p.ref}: no {element} in the deck"
            kind, nodes, value = deck[element]
            claimed.add(element)
            assert kind == KIND[p.ref.rstrip("0123456789")[0]], (p.ref, element, kind)
            if kind in "RC" and p.ref not in VALUE_EXEMPT:
                assert spice_value(value) == pytest.approx(part_value(rows[p.ref]["value"])), (
                    p.ref, value, rows[p.ref]["value"])
            for pin, idx in pins.items():
                net, node = p.pins[pin], nodes[idx]
                assert net_to_node.setdefault(net, node) == node, (
                    f"net {net} is {net_to_node[net]} in the deck, but {p.ref} pin {pin} "
                    f"meets it at {node}")
                assert node_to_net.setdefault(node, net) == net, (
                    f"deck node {node} is both {node_to_net[node]} and {net}")
    assert net_to_node["GND"] == "0"
    # every part of the deck is on the list, or is what the deck models besides
    passive = {k for k, (kind, _, _) in deck.items() if kind in "RCDM"}
    assert passive - claimed == set(MODEL_ONLY), passive - claimed - set(MODEL_ONLY)


@pytest.mark.parametrize("variant", circuit.VARIANTS)
def test_the_voltage_channel_values_are_the_front_ends(variant):
    import json
    name = "frontend.json" if variant == "30V" else "frontend-55v.json"
    fe = json.loads((SCHEMATICS / name).read_text())
    rows = circuit.rows(variant)
    assert part_value(rows["R9"]["value"]) == fe["voltage_divider"]["r_top_ohm"]
    assert part_value(rows["R10"]["value"]) == fe["voltage_divider"]["r_bottom_ohm"]
    assert part_value(rows["C5"]["value"]) == pytest.approx(
        fe["voltage_divider_filter_pf"] * 1e-12)
    if variant == "30V":  # the deck's defaults are the 30 V build
        d = subcircuits()["VOLTAGE_CH"]["params"]
        assert spice_value(d["rtop"]) == fe["voltage_divider"]["r_top_ohm"]
        assert spice_value(d["cf"]) == pytest.approx(fe["voltage_divider_filter_pf"] * 1e-12)


def test_the_committed_netlists_and_boms_are_what_the_circuit_gives(tmp_path):
    circuit.write_all(tmp_path)
    for f in tmp_path.iterdir():
        assert (SCHEMATICS / f.name).read_text() == f.read_text(), (
            f"{f.name} is stale: run python schematics/circuit.py")


def test_every_net_joins_two_pins_and_every_part_can_be_ordered():
    for net, nodes in circuit.nets().items():
        assert len(nodes) >= 2, f"net {net} goes nowhere: {nodes}"
    for v in circuit.VARIANTS:
        rows = circuit.rows(v)
        for p in circuit.parts():
            if p.ref != "W1":
                assert p.ref in rows, f"{p.ref} is not in parts.csv ({v})"
        bom = list(csv.reader((SCHEMATICS / f"bom-{v.lower()}.csv").open()))
        refs = [r for line in bom[1:] for r in line[1].split()]
        assert sorted(refs) == sorted(p.ref for p in circuit.parts() if p.ref != "W1")
        assert all(line[5] and line[6] and line[7] for line in bom[1:])
