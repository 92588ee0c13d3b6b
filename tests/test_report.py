"""The customer's report (outputs/report.py, `glowtrace report`): per owner
and visit or per tube, verdicts in plain words first, local time, nothing
empty, the shop from its settings file; and the page checked in a real
browser (headless Chromium, where it is installed): it renders, shows each
verdict, overflows nothing at A4 width, and prints."""

import json
import re
import shutil
import subprocess

import pytest

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
SHOP = """[shop]
name = "Quillwort Valve & Wireless Repairs"
address = "14 Fennick Lane, Bramblecote"
contact = "bench@quillwort.example"
"""


@pytest.fixture(scope="module")
def reports(demo_run, tmp_path_factory):
    """An owner's visit (two 12AX7s, one past its limit) and a tube tested
    once, written as a user writes them; with what --json said of each."""
    import contextlib
    import io
    from glowtrace.cli import main
    d = tmp_path_factory.mktemp("reports")
    (d / "shop.toml").write_text(SHOP)
    db = str(demo_run[0])
    out = {}
    for name, target in (("visit", "ysolde MARRIN"), ("once", "QW-0122-V5")):
        path = d / f"{name}.html"
        said = io.StringIO()
        with contextlib.redirect_stdout(said):
            assert main(["--db", db, "--json", "report", target, "-o", str(path), "--shop",
                         str(d / "shop.toml")]) == 0
        out[name] = path
        out[name + "_json"] = json.loads(said.getvalue())
    return out


def test_the_visit_page_leads_with_plain_verdicts_and_keeps_statistics_for_the_appendix(
        reports):
    page = reports["visit"].read_text()
    assert "Quillwort Valve &amp; Wireless Repairs" in page and "14 Fennick Lane" in page
    assert "Customer: Ysolde Marrin" in page and "Visit: " in page
    body, appendix = page.split("class='appendix'")
    assert "Heater fine, no change since" in body
    assert "Replace the tube soon" in body
    # statistics words only in the appendix
    for word in ("Mann-Kendall", "CUSUM", "p = "):
        assert word not in body and word in appendix
    text = re.sub(r"data:image/png;base64,[A-Za-z0-9+/=]+", "", page)
    assert "UTC" not in text  # local time throughout


def test_a_tube_tested_once_gets_its_curve_and_no_trend_panels(reports):
    page = reports["once"].read_text()
    assert "alt='start-up curves of QW-0122-V5'" in page
    assert "alt='trends of" not in page
    assert "Heater fine today (first test)" in page


def test_bad_report_input_gets_one_line(demo_run, cli, tmp_path):
    db = demo_run[0]
    code, _, err = cli("--db", db, "report", "orla venn", "-o", tmp_path / "r.html")
    assert code != 0 and "no tube or owner 'orla venn'" in err
    code, _, err = cli("--db", db, "report", "ysolde marrin", "--visit", "2020-01-01",
                       "-o", tmp_path / "r.html")
    assert code != 0 and "their visits" in err
    code, _, err = cli("--db", db, "report", "ysolde marrin", "--visit", "May 5",
                       "-o", tmp_path / "r.html")
    assert code != 0 and "YYYY-MM-DD" in err
    (tmp_path / "bad.toml").write_text("[shop\n")
    code, _, err = cli("--db", db, "report", "QW-0122-V5", "--shop", tmp_path / "bad.toml",
                       "-o", tmp_path / "r.html")
    assert code != 0 and "not a settings file" in err


CHECK = """<script>
addEventListener('load', () => {
  const width = document.documentElement.clientWidth;
  const wide = [...document.querySelectorAll('table, img, h1, h2, p')].filter(
    e => e.scrollWidth > e.clientWidth + 1 || e.getBoundingClientRect().right > width + 1);
  document.body.setAttribute('data-overflowing', wide.length);
  document.body.setAttribute('data-images', [...document.images].filter(
    i => i.complete && i.naturalWidth > 0).length);
});
</script></body>"""


def _chromium(*args, timeout=90):
    return subprocess.run([CHROMIUM, "--headless", "--no-sandbox", "--disable-gpu",
                           "--hide-scrollbars", *args], capture_output=True, text=True,
                          timeout=timeout)


@pytest.mark.skipif(CHROMIUM is None, reason="Chromium is not installed (Debian: chromium)")
@pytest.mark.parametrize("name", ["visit", "once"])
def test_the_page_renders_in_a_real_browser(reports, tmp_path, name):
    page = reports[name].read_text()
    checked = tmp_path / f"{name}.html"
    checked.write_text(page.replace("</body>", CHECK))
    # A4's width at 96 dpi: 794 px
    r = _chromium("--window-size=794,1123", "--virtual-time-budget=5000", "--dump-dom",
                  checked.as_uri())
    dom = r.stdout
    assert r.returncode == 0, r.stderr[-500:]
    title = re.search(r"<title>(.*?)</title>", page).group(1)
    assert f"<title>{title}</title>" in dom
    assert 'data-overflowing="0"' in dom, re.search(r"data-overflowing=\"\d+\"", dom)
    n_images = page.count("<img ")
    assert f'data-images="{n_images}"' in dom  # every chart decoded
    verdicts = re.findall(r"<p class='verdict [a-z]+'>(.*?)</p>", page)
    assert verdicts and all(v in dom for v in verdicts)
    shot = tmp_path / "shot.png"
    r = _chromium("--window-size=794,1123", f"--screenshot={shot}", reports[name].as_uri())
    from PIL import Image, ImageStat
    im = Image.open(shot).convert("L")
    assert im.size == (794, 1123) and ImageStat.Stat(im).stddev[0] > 10  # not a blank page
    pdf = tmp_path / "print.pdf"
    r = _chromium(f"--print-to-pdf={pdf}", "--no-pdf-header-footer", reports[name].as_uri())
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF")
    boxes = re.findall(rb"/MediaBox \[0 0 ([\d.]+) ([\d.]+)\]", data)
    assert boxes and all(abs(float(w) - 595.9) < 2 and abs(float(h) - 842.9) < 2
                         for w, h in boxes)  # A4 from the print CSS, in points


def test_report_json_names_each_tube_with_its_verdict(reports):
    r = reports["visit_json"]
    assert r["kind"] == "owner" and {t["tube"] for t in r["tubes"]} == {"QW-0117-V1",
                                                                        "QW-0117-V2"}
    assert all(t["verdict"] and t["advice"] for t in r["tubes"])
    once = reports["once_json"]
    assert once["kind"] == "tube" and once["status"] == once["tubes"][0]["status"]


def test_plain_verdicts_for_a_first_test_and_a_steady_tube():
    from glowtrace.judgement.verdict import plain
    at = "2026-03-10T09:00:00Z"
    both = [{"uuid": "u1", "scored": 1, "at": at, "section": s} for s in "AB"]
    first = plain({"status": "no baseline yet", "grade": "select", "sections": {},
                   "captures": both})
    assert first["verdict"] == "Heater fine today (first test)"  # one capture, two sections
    off = plain({"status": "no baseline yet", "grade": "unfit", "sections": {},
                 "captures": both})
    assert off["level"] == "watch" and "outside the usual range" in off["verdict"]
    steady = plain({"status": "steady", "grade": "select", "sections": {}, "captures": both})
    assert steady["verdict"] == "Heater fine, no change since March 2026"
    assert plain({"status": "heater fault", "grade": "unfit", "sections": {},
                  "captures": both})["advice"] == "Replace the tube."
