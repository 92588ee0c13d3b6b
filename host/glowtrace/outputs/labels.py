"""A printable sheet of tube labels (PDF or SVG, drawn with matplotlib):
per tube its label, type, test date, status and grade, key figures, and a QR
code of the label (segno) so the box and the logbook stay tied together.

Grids are given in mm: columns, rows, label width and height, left and top
margins, gaps. A few common sheets are named; any other is `--grid-mm`."""

from dataclasses import dataclass

import numpy as np

MM = 1 / 25.4  # inch
PAPERS = {"A4": (210.0, 297.0), "letter": (215.9, 279.4)}


@dataclass(frozen=True)
class Grid:
    cols: int
    rows: int
    w: float       # label width, mm
    h: float       # label height, mm
    left: float    # margin, mm
    top: float
    hgap: float = 0.0
    vgap: float = 0.0

    def fits(self, paper: tuple[float, float]) -> bool:
        pw, ph = paper
        return (self.left + self.cols * self.w + (self.cols - 1) * self.hgap <= pw + 1e-6
                and self.top + self.rows * self.h + (self.rows - 1) * self.vgap <= ph + 1e-6)


# common sheets (mm, measured from their published templates' dimensions;
# a user's own sheet: --grid-mm)
GRIDS = {
    "3x8": Grid(3, 8, 70.0, 36.0, 0.0, 4.5),        # A4, 24 labels 70 x 36
    "3x7": Grid(3, 7, 63.5, 38.1, 7.2, 15.1, 2.5, 0.0),  # A4, 21 labels 63.5 x 38.1
    "2x5": Grid(2, 5, 101.6, 50.8, 4.0, 12.7, 3.2, 0.0),  # letter, 10 labels 4 x 2 in
}


def parse_grid_mm(text: str) -> Grid:
    """cols,rows,w,h,left,top[,hgap,vgap] in mm."""
    try:
        parts = [float(x) for x in text.split(",")]
    except ValueError:
        raise ValueError(f"grid {text!r}: numbers separated by commas") from None
    if len(parts) not in (6, 8) or parts[0] < 1 or parts[1] < 1 or min(parts[2:]) < 0 \
            or parts[2] <= 0 or parts[3] <= 0 or parts[0] != int(parts[0]) \
            or parts[1] != int(parts[1]):
        raise ValueError(f"grid {text!r}: cols,rows,width,height,left,top[,hgap,vgap] in mm")
    return Grid(int(parts[0]), int(parts[1]), *parts[2:])


def label_items(store, cfg: dict, wanted: list[str], owner: str | None,
                type_name: str | None) -> list[dict]:
    """What each tube's label says: label, type, day of its last test (local),
    status, grade and up to three key figures with units."""
    from ..errors import GlowtraceError
    from ..judgement.scoring import assess_fleet
    from . import stock
    seen = stock.last_seen(store, owner, type_name)
    rows = stock.stock_rows(assess_fleet(store, cfg, type_name, owner))
    if wanted:
        missing = [t for t in wanted if t not in {r["tube"] for r in rows}]
        if missing:
            raise GlowtraceError(f"no tube {missing[0]!r} in the logbook"
                                 + (" among those chosen" if owner or type_name else ""))
        rows = [r for r in rows if r["tube"] in wanted]
    items = []
    for r in rows:
        figs = []
        if r["rated_hot_current_a"]:
            figs.append("I " + " ".join(f"{s} {v:.4g}" for s, v in
                                         r["rated_hot_current_a"].items()) + " A")
        if r["flash_index"]:
            figs.append("flash " + " ".join(f"{s} {v:.2g}" for s, v in r["flash_index"].items()))
        if r["current_deviation"]:
            figs.append("vs rated " + " ".join(f"{s} {100 * v:+.1f}" for s, v in
                                                r["current_deviation"].items()) + " %")
        items.append({"label": r["tube"], "type": r["type"], "date": seen.get(r["tube"]),
                      "status": r["status"], "grade": r["grade"], "figures": figs})
    return items


def qr_matrix(text: str) -> np.ndarray:
    """The QR code of a label as a boolean array (True dark), a full QR code
    (not Micro QR, which few phone readers take), medium error correction."""
    q = segno_make(text)
    return np.array([[bool(v) for v in row] for row in q.matrix])


def segno_make(text: str):
    import segno
    return segno.make(text, micro=False, error="m")


def qr_box(grid: Grid, paper, index: int) -> tuple[float, float, float]:
    """(x, y, size) in mm from the page's top left of label index's QR code
    (quiet zone included: the code's own 4 modules)."""
    col, row = index % grid.cols, (index // grid.cols) % grid.rows
    x0 = grid.left + col * (grid.w + grid.hgap)
    y0 = grid.top + row * (grid.h + grid.vgap)
    size = min(grid.h - 4.0, grid.w * 0.42)
    return x0 + 2.0, y0 + (grid.h - size) / 2, size


def write_sheet(items: list[dict], path, paper_name: str, grid: Grid) -> int:
    """Draw the labels (several pages in a PDF; an SVG holds the first page
    and says so by raising if more are needed). Returns the pages written."""
    import matplotlib
    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    from matplotlib.backends.backend_pdf import PdfPages
    paper = PAPERS[paper_name]
    if not grid.fits(paper):
        raise ValueError(f"the grid does not fit on {paper_name} ({paper[0]:g} x {paper[1]:g} mm)")
    per_page = grid.cols * grid.rows
    pages = [items[i:i + per_page] for i in range(0, len(items), per_page)] or [[]]
    suffix = str(path).lower().rsplit(".", 1)[-1]
    if suffix == "svg" and len(pages) > 1:
        raise ValueError(f"{len(items)} labels need {len(pages)} sheets: write a PDF, or "
                         "choose fewer tubes for an SVG")
    figs = [_page(plt, page, paper, grid) for page in pages]
    if suffix == "pdf":
        with PdfPages(path) as pdf:
            for f in figs:
                pdf.savefig(f)
    else:
        figs[0].savefig(path)
    for f in figs:
        plt.close(f)
    return len(figs)


def _page(plt, items, paper, grid: Grid):
    pw, ph = paper
    fig = plt.figure(figsize=(pw * MM, ph * MM))

    def axes_mm(x, y, w, h):  # from the top left, mm
        return fig.add_axes([x / pw, 1 - (y + h) / ph, w / pw, h / ph])
    for i, it in enumerate(items):
        qx, qy, qs = qr_box(grid, paper, i)
        m = qr_matrix(it["label"])
        ax = axes_mm(qx, qy, qs, qs)
        ax.imshow(np.pad(~m, 4, constant_values=True), cmap="gray", vmin=0, vmax=1,
                  interpolation="nearest", extent=(0, 1, 0, 1))
        ax.set_axis_off()
        col, row = i % grid.cols, i // grid.cols
        x0 = grid.left + col * (grid.w + grid.hgap) + 4.0 + qs
        y0 = grid.top + row * (grid.h + grid.vgap)
        # the text's room beside the code: a narrow label gets smaller type
        k = min(1.0, (grid.w - qs - 6.0) / 36.0)
        lines = [(it["label"], 10, "bold"), (f"{it['type'] or '?'}  tested {it['date'] or '-'}", 6.5,
                                              "normal"),
                 (f"{it['status']}, {it['grade'] or '-'}", 6.5, "normal")]
        lines += [(f, 6, "normal") for f in it["figures"][:3]]
        y = y0 + 5.0
        for text, size, weight in lines:
            if y + size * k * 0.4 > y0 + grid.h - 1.0:
                break  # no room left on this label for another line
            fig.text(x0 / pw, 1 - y / ph, text, fontsize=size * k, fontweight=weight,
                     va="top", ha="left")
            y += (size * 0.45 + 1.2) * k
    return fig
