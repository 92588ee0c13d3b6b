"""The drawn schematic and the parts list agree with each other."""

import csv
import re
import sys

from spice import SCHEMATICS

sys.path.insert(0, str(SCHEMATICS))
import draw_schematic  # noqa: E402

ROWS = list(csv.DictReader((SCHEMATICS / "parts.csv").open()))
PARTS = {r["reference"]: r for r in ROWS if r["variant"] in ("all", "30V")}
DRAWN = "F1 C1 D1 R9 R10 C5 Q1 RS1 R1 R3 U5 U1 R7 C3 D2".split()


def _labels(svg: str) -> set:
    return set(re.findall(r"\b([A-Z]{1,2}\d{1,2})\b", svg))


def test_drawing_regenerates_with_every_part(tmp_path):
    out = tmp_path / "t.svg"
    draw_schematic.draw(out)
    labels = _labels(out.read_text())
    assert set(DRAWN) <= labels
    # the committed drawing is the same circuit
    assert set(DRAWN) <= _labels((SCHEMATICS / "tester.svg").read_text())


def test_every_drawn_or_simulated_part_is_listed_with_a_reason():
    lib = (SCHEMATICS / "frontend.lib").read_text() + (SCHEMATICS / "tester.cir").read_text()
    for ref in DRAWN:
        assert ref in PARTS and PARTS[ref]["why"], ref
    for ref, row in PARTS.items():
        assert row["value"] and row["why"], ref
        if row["power_w"]:
            assert 0 < float(row["derating"]) <= 1, ref
    assert "QSW" in lib and "CURRENT_CH" in lib and "VOLTAGE_CH" in lib


def test_the_parts_list_can_be_ordered_for_either_variant():
    """Every part has an example to order, its package and footprint beside
    the requirement; a part that differs between the variants is listed for
    each of them, and nothing else is."""
    for r in ROWS:
        assert r["variant"] in ("all", "30V", "55V"), r["reference"]
        for col in ("example_parts", "package", "footprint", "value", "why"):
            assert r[col].strip(), (r["reference"], col)
    by_variant = {v: {r["reference"] for r in ROWS if r["variant"] in ("all", v)}
                  for v in ("30V", "55V")}
    assert by_variant["30V"] == by_variant["55V"]
    own = {r["reference"] for r in ROWS if r["variant"] != "all"}
    assert own == {"F1", "D1", "C1", "Q1", "Q2", "R9", "C5"}
