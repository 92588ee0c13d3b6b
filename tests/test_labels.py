"""Tube labels (outputs/labels.py, `glowtrace labels`): every QR code on a
rendered sheet decodes back to its tube's label with a decoder independent
of the encoder (zxing-cpp, not segno), the grids fit their paper, a box of
tubes fills several sheets of a PDF, and bad input gets one line."""

import json

import pytest

from glowtrace.outputs import labels

zxingcpp = pytest.importorskip("zxingcpp")


def _items(n, prefix="B7-"):
    return [{"label": f"{prefix}{i:03d}", "type": "6V6", "date": "2026-12-02",
             "status": "no baseline yet", "grade": "select",
             "figures": ["I A 0.4508 A", "flash A 0.02", "vs rated A +0.2 %"]}
            for i in range(1, n + 1)]


@pytest.mark.parametrize("paper, grid", [("A4", "3x8"), ("A4", "3x7"), ("letter", "2x5")])
def test_every_code_on_a_sheet_decodes_to_its_label(tmp_path, paper, grid):
    from PIL import Image
    g = labels.GRIDS[grid]
    items = _items(g.cols * g.rows)
    png = tmp_path / "sheet.png"
    labels.write_sheet(items, png, paper, g)
    found = zxingcpp.read_barcodes(Image.open(png).convert("L"))
    assert sorted(r.text for r in found) == [it["label"] for it in items]
    assert all(r.format == zxingcpp.BarcodeFormat.QRCode for r in found)  # not Micro QR


def test_the_named_grids_fit_their_paper_and_a_wrong_one_is_refused(tmp_path):
    assert labels.GRIDS["3x8"].fits(labels.PAPERS["A4"])
    assert labels.GRIDS["2x5"].fits(labels.PAPERS["letter"])
    wide = labels.parse_grid_mm("3,8,80,36,0,4")
    assert not wide.fits(labels.PAPERS["A4"])
    with pytest.raises(ValueError, match="does not fit"):
        labels.write_sheet(_items(2), tmp_path / "x.pdf", "A4", wide)
    for bad in ("3,8,70", "a,b,c,d,e,f", "0,8,70,36,0,4", "2.5,8,70,36,0,4"):
        with pytest.raises(ValueError):
            labels.parse_grid_mm(bad)


def test_a_box_fills_several_pdf_sheets_and_an_svg_holds_one(tmp_path):
    pdf = tmp_path / "box.pdf"
    assert labels.write_sheet(_items(30), pdf, "A4", labels.GRIDS["3x8"]) == 2
    assert pdf.read_bytes().count(b"/Type /Page\n") + pdf.read_bytes().count(
        b"/Type /Page ") >= 2
    with pytest.raises(ValueError, match="need 2 sheets"):
        labels.write_sheet(_items(30), tmp_path / "box.svg", "A4", labels.GRIDS["3x8"])


def test_labels_command_on_the_demo(demo_run, cli, tmp_path):
    db = demo_run[0]
    out_svg = tmp_path / "demo.svg"
    code, out, err = cli("--db", db, "--json", "labels", "-o", out_svg, "--lot", "ysolde marrin")
    assert code == 0, err
    r = json.loads(out)
    assert r["labels"] == 2 and r["pages"] == 1 and out_svg.read_text().startswith("<?xml")
    code, _, err = cli("--db", db, "labels", "-o", tmp_path / "x.txt")
    assert code != 0 and "use .pdf, .svg" in err
    code, _, err = cli("--db", db, "labels", "-o", tmp_path / "x.pdf", "NO-SUCH")
    assert code != 0 and "no tube 'NO-SUCH'" in err
    code, _, err = cli("--db", db, "labels", "-o", tmp_path / "x.pdf", "--grid-mm", "1,2")
    assert code != 0 and "cols,rows" in err
