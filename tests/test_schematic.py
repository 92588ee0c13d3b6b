"""The drawn schematic and the parts list agree with each other."""

import csv
import re
import sys

import pytest

from spice import SCHEMATICS

sys.path.insert(0, str(SCHEMATICS))
import draw_schematic  # noqa: E402

ROWS = list(csv.DictReader((SCHEMATICS / "parts.csv").open()))
PARTS = {r["reference"]: r for r in ROWS if r["variant"] in ("all", "30V")}
import circuit  # noqa: E402

DRAWN = [p.ref for p in circuit.parts()]


def _labels(svg: str) -> set:
    return set(re.findall(r"\b([A-Z]{1,2}\d{1,2})\b", svg))


def _texts(svg: str) -> str:
    """The drawing's words (schemdraw's SVG writes each as a <tspan>)."""
    return " ".join(re.findall(r">([^<>]+)</tspan>", svg) + re.findall(r">([^<>]+)</text>", svg))


@pytest.mark.parametrize("variant, name", [("30V", "tester"), ("55V", "tester-55v")])
def test_the_drawing_shows_every_part_and_net_and_is_the_committed_one(tmp_path, variant, name):
    out = tmp_path / f"{name}.svg"
    draw_schematic.draw(out, variant)
    text = out.read_text()
    words = _texts(text)
    for ref in DRAWN:
        if ref != "W1":
            assert re.search(rf"\b{ref}\b", words), f"{ref} is not drawn"
    for net in circuit.nets():
        assert net in words, f"net {net} is not named in the drawing"
    rows = circuit.rows(variant)
    for ref in ("R9", "C5", "D1"):  # the variant's own values are the ones drawn
        assert rows[ref]["value"].split(",")[0] in words, (ref, rows[ref]["value"])
    assert _texts((SCHEMATICS / f"{name}.svg").read_text()) == words, (
        f"{name}.svg is stale: run python schematics/draw_schematic.py")


def test_the_rendered_drawing_fits_its_page(tmp_path):
    """Rendered to PNG: a size a printer and a screen can take, and nothing
    cut at an edge (the ink stays a margin inside the page)."""
    import numpy as np
    from PIL import Image
    out = tmp_path / "tester.png"
    draw_schematic.draw(out, "30V")
    im = np.asarray(Image.open(out).convert("L"))
    h, w = im.shape
    assert 1500 <= w <= 6000 and 1500 <= h <= 6000, (w, h)
    ink = np.argwhere(im < 200)
    (top, left), (bottom, right) = ink.min(axis=0), ink.max(axis=0)
    margin = 20  # px
    assert top >= margin and left >= margin, (top, left)
    assert bottom <= h - margin and right <= w - margin, (bottom, right, h, w)
    # and the committed one is whole too
    im = np.asarray(Image.open(SCHEMATICS / "tester.png").convert("L"))
    ink = np.argwhere(im < 200)
    assert ink.min(axis=0).min() >= margin


def test_every_drawn_or_simulated_part_is_listed_with_a_reason():
    lib = (SCHEMATICS / "frontend.lib").read_text() + (SCHEMATICS / "tester.cir").read_text()
    for ref in [r for r in DRAWN if r != "W1"]:
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
