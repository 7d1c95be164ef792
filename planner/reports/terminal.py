"""The terminal renderer of :class:`~planner.reports.table.Table` (rich) and its prose lines.

Layout rule: a number is never split over two lines. Number columns do not wrap; a table wider
than the console is folded into consecutive tables that repeat the first columns, and prose
lines are packed from unbreakable pieces. So the tables read at 80 columns (a pipe or a CI log)
and use the room when there is more.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from rich import box
from rich.cells import cell_len
from rich.console import Console
from rich.table import Table as RichTable
from rich.text import Text

from planner.reports.formats import overflow_notes
from planner.reports.table import Table

#: columns are separated by this many spaces (rich: collapsed padding of 1 plus the divider)
GAP = 2


def words(text: str) -> list[str]:
    """``text`` as pieces :func:`say` may put on different lines."""
    return text.split(" ")


def pack(pieces: Sequence[str], width: int, *, indent: int = 2) -> list[str]:
    """``pieces`` (each never split) joined by spaces into lines of ``width`` cells;
    continuation lines are indented.

    >>> pack(["Lambda", "2.53 [2.52, 2.55]", "needed"], 20)
    ['Lambda', '  2.53 [2.52, 2.55]', '  needed']
    """
    lines: list[str] = []
    cur = ""
    for p in (x for x in pieces if x):
        cand = f"{cur} {p}" if cur else p
        if cur and cell_len(cand) > width:
            lines.append(cur)
            cur = " " * indent + p
        else:
            cur = cand
    if cur:
        lines.append(cur)
    return lines


def say(console: Console, *pieces: str, indent: int = 2, style: str = "", notes: bool = True) -> None:
    """Print ``pieces`` packed into lines of the console's width (see :func:`pack`). With
    ``notes``, a line showing an overflow or an underflow is followed by the note that explains
    it."""
    for line in pack(pieces, max(console.width, 20), indent=indent):
        console.print(Text(line, style=style), soft_wrap=True)
    if notes:
        for n in overflow_notes(pieces):
            say(console, *words(n), indent=4, notes=False)


def footnotes(console: Console, notes: Iterable[str]) -> None:
    """Indented note lines under a table."""
    for n in notes:
        if n:
            say(console, *n.split(" "), indent=4)


def fold(widths: Sequence[int], *, key: int, width: int) -> list[list[int]]:
    """Groups of the columns after the first ``key`` that fit ``width`` beside those (each
    group is printed as its own table).

    >>> fold([10, 20, 20, 20], key=1, width=60), fold([10, 20, 20, 20], key=1, width=80)
    ([[1, 2], [3]], [[1, 2, 3]])
    """
    groups: list[list[int]] = []
    base = sum(widths[:key]) + GAP * key
    cur: list[int] = []
    for j in range(key, len(widths)):
        if cur and base + sum(widths[k] + GAP for k in cur) + widths[j] > width:
            groups.append(cur)
            cur = []
        cur.append(j)
    groups.append(cur)
    return groups


def print_table(console: Console, table: Table) -> None:
    """One table, or (if wider than the console) several that repeat the first
    ``table.fold_key`` columns (titled from ``table.fold_titles`` where given, else
    "<title> (continued)"), then its notes as one caption.

    Cells never wrap: each column is as wide as its widest cell or header. Title, lead lines and
    caption are printed as lines of the console's width (rich would squeeze them to the
    table's).
    """
    headers, rows = table.headers, [[str(c) for c in r] for r in table.rows]
    widths = [max([cell_len(headers[j]), *(cell_len(r[j]) for r in rows)]) for j in range(len(headers))]
    key = table.fold_key
    for gi, cols in enumerate(fold(widths, key=key, width=console.width)):
        console.print()
        title = (table.title if gi == 0 else table.fold_titles[gi - 1] if gi <= len(table.fold_titles)
                 else f"{table.title} (continued)")
        say(console, *words(title), style="bold", notes=False)
        if gi == 0:
            for line in table.lead:
                say(console, *words(line), notes=False)
        t = RichTable(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, collapse_padding=True)
        for j in [*range(key), *cols]:
            t.add_column(Text(headers[j]), justify="left" if j in table.left else "right", no_wrap=True,
                         min_width=widths[j])
        for r in rows:
            t.add_row(*(Text(r[j]) for j in [*range(key), *cols]))
        console.print(t)
    caption = "; ".join(table.all_notes)
    if caption:
        say(console, *words(caption), notes=False)
