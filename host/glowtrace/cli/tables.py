"""Tables that fit the terminal without cutting anything.

A label, a date or a figure is never shortened: when a table is too wide for
the terminal, its least important columns are left out (and named in a note),
and when even the essential columns do not fit, every row becomes a block of
`heading: value` lines. Free text (notes, reasons) may wrap, in its column or
under a hanging indent; it is never cut either."""

from dataclasses import dataclass

from rich import box
from rich.cells import cell_len
from rich.console import Console
from rich.table import Table
from rich.text import Text

WRAP_MIN = 16  # narrowest a wrapping column is squeezed to


@dataclass
class Col:
    header: str
    priority: int = 0       # 0: always shown; the highest number is left out first
    justify: str = "left"
    wrap: bool = False      # free text that may wrap; figures and labels never do


def _text(cell) -> Text:
    """Cells are plain text (user data may hold brackets); styled cells come as Text."""
    return cell if isinstance(cell, Text) else Text(str(cell))


def _needed(col: Col, cells: list[Text]) -> int:
    widths = [cell_len(col.header)] + [max((cell_len(line) for line in c.plain.split("\n")),
                                           default=0) for c in cells]
    natural = max(widths)
    if not col.wrap:
        return natural
    longest_word = max((cell_len(w) for c in cells for w in c.plain.split()), default=0)
    return max(min(natural, WRAP_MIN), longest_word, cell_len(col.header))


def table_width(widths: list[int]) -> int:
    """Width of a SIMPLE_HEAD table without edges: each column padded by one
    space either side, one space between columns."""
    return sum(w + 2 for w in widths) + max(len(widths) - 1, 0)


def fit(console: Console, cols: list[Col], rows: list[list], title: str | None = None,
        caption: str | None = None, note_dropped: bool = True) -> list[str]:
    """Print rows under cols, as wide as the terminal allows. Returns the
    headers of the columns left out."""
    cells = [[_text(c) for c in r] for r in rows]
    need = [_needed(col, [r[k] for r in cells]) for k, col in enumerate(cols)]
    shown = list(range(len(cols)))
    while table_width([need[k] for k in shown]) > console.width:
        droppable = [k for k in shown if cols[k].priority > 0]
        if not droppable:
            _blocks(console, cols, cells, title, caption)
            return []
        # the least important column goes first; of equals, the rightmost
        shown.remove(max(droppable, key=lambda k: (cols[k].priority, k)))
    t = Table(box=box.SIMPLE_HEAD, show_edge=False, title=title, caption=caption,
              title_justify="left", caption_justify="left")
    for k in shown:
        c = cols[k]
        t.add_column(c.header, justify=c.justify, no_wrap=not c.wrap,
                     overflow="fold" if c.wrap else "ignore",
                     min_width=need[k] if not c.wrap else None)
    for r in cells:
        t.add_row(*[r[k] for k in shown])
    console.print(t)
    dropped = [cols[k].header for k in range(len(cols)) if k not in shown]
    if dropped and note_dropped:
        console.print(Text(f"Not shown at this width: {', '.join(dropped)} "
                           "(a wider terminal or --json shows them).", style="dim"))
    return dropped


def _blocks(console: Console, cols: list[Col], cells: list[list[Text]], title, caption):
    """One block per row: the first cell as its heading, then the others."""
    if title:
        console.print(Text(title, style="bold"))
    label_w = max(cell_len(c.header) for c in cols[1:]) + 1 if len(cols) > 1 else 0
    for r in cells:
        console.print(Text.assemble(Text(cols[0].header + ": "), r[0]), style="bold")
        g = Table.grid(padding=(0, 1))
        g.add_column(width=label_w + 2, no_wrap=True)
        g.add_column(overflow="fold")
        for col, cell in zip(cols[1:], r[1:]):
            g.add_row(f"  {col.header}:", cell)
        console.print(g)
    if caption:
        console.print(Text(caption, style="dim"))


def hanging(console: Console, items: list, bullet: str = "  - ") -> None:
    """Items that wrap under themselves, not back to the left edge."""
    if not items:
        return
    g = Table.grid()
    g.add_column(width=cell_len(bullet), no_wrap=True)
    g.add_column(overflow="fold")
    for item in items:
        g.add_row(bullet, _text(item))
    console.print(g)


def pairs(console: Console, rows: list[tuple], title: str | None = None) -> None:
    """Label-value lines (a record), the values wrapping under themselves."""
    if title:
        console.print(Text(title, style="bold"))
    w = max((cell_len(str(k)) for k, _ in rows), default=0)
    g = Table.grid(padding=(0, 2))
    g.add_column(width=w, no_wrap=True)
    g.add_column(overflow="fold")
    for k, v in rows:
        g.add_row(str(k), _text(v))
    console.print(g)
