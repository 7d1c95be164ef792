"""The one table model every report renderer draws from, with the Markdown and CSV renderers.

A :class:`Table` is a title, headers, rows of cells, ``lead`` lines above and ``notes`` below.
Tables for people hold text cells made by :mod:`planner.reports.formats` (so the terminal
(:mod:`planner.reports.terminal`), Markdown (:func:`to_markdown`) and HTML
(:mod:`planner.reports.html`) show the same strings); tables for programs hold raw values and
are written by :func:`to_csv`: one header row, numbers at full precision, intervals as separate
best/low/high columns, empty cells for missing or non-finite values.

>>> t = Table(title="Demo", headers=("lever", "factor"), rows=[("joint", "0.722 [0.715, 0.728]")])
>>> print(to_markdown([t], heading="Example").splitlines()[4:7])
['## Demo', '', '| lever | factor |']
>>> to_csv(Table(title="raw", headers=("a", "note"), rows=[(float("inf"), ""), (-0.0, "x")]))
'a,note\\n,"a: beyond any reachable (no finite value, left empty)"\\n0.0,x\\n'
"""

from __future__ import annotations

import csv
import dataclasses
import io
import math
from collections.abc import Iterable, Sequence
from typing import Any

from planner.reports.formats import BEYOND, CAVEAT, INTERVAL_NOTE, overflow_notes

#: CSV columns (or requirements quantities) that are whole numbers: written as integers
INTEGER_COLUMNS = frozenset({"distance", "physical_qubits", "today_distance", "today_physical_qubits"})


@dataclasses.dataclass(frozen=True, kw_only=True)
class Table:
    """One table: ``lead`` lines above it, ``notes`` below, then the ``caveat`` line (Markdown
    and HTML; the terminal prints the notes as the caption and no caveat).

    Layout hints for the terminal: ``left`` (left-justified columns; the others are numbers),
    ``fold_key`` (how many first columns a too-wide table repeats when folded) and
    ``fold_titles`` (titles of the folded parts). ``integer_rows`` (CSV): rows whose whole
    numbers are written as integers. Sequences are stored as tuples (the table is frozen).
    """

    title: str
    headers: Sequence[str]
    rows: Sequence[Sequence[Any]]
    key: str = ""
    lead: Sequence[str] = ()
    notes: Sequence[str] = ()
    caveat: str = CAVEAT
    left: Sequence[int] = (0,)
    fold_key: int = 1
    fold_titles: Sequence[str] = ()
    integer_rows: Sequence[bool] = ()

    def __post_init__(self) -> None:
        for name in ("headers", "lead", "notes", "left", "fold_titles", "integer_rows"):
            object.__setattr__(self, name, tuple(getattr(self, name)))
        object.__setattr__(self, "rows", tuple(tuple(r) for r in self.rows))
        bad = [r for r in self.rows if len(r) != len(self.headers)]
        if bad:
            raise ValueError(f"table {self.key or self.title}: row {bad[0]!r} does not have "
                             f"{len(self.headers)} cells")

    @property
    def all_notes(self) -> tuple[str, ...]:
        """``notes`` and, where a cell or lead line shows an overflow or underflow, its note."""
        extra = [n for n in overflow_notes([*self.rows, *self.lead]) if n not in self.notes]
        return (*self.notes, *extra)


#: the name other modules (and scripts) have used for the table model
TextTable = Table


# ---------------------------------------------------------------------------------------------
# Markdown


def _md_line(text: str) -> str:
    return text.replace("\n", " ")


def _md_cell(text: object) -> str:
    return _md_line(str(text)).replace("|", "\\|")


def to_markdown(tables: Sequence[Table], *, heading: str) -> str:
    """One Markdown document: heading, the interval convention once, then each table with its
    lead lines, notes and caveat."""
    out = [f"# {heading}", "", INTERVAL_NOTE, ""]
    for t in tables:
        out += [f"## {t.title}", ""]
        for x in t.lead:  # one paragraph per line
            out += [_md_line(x), ""]
        out.append("| " + " | ".join(_md_cell(h) for h in t.headers) + " |")
        out.append("|" + "|".join("---" for _ in t.headers) + "|")
        out += ["| " + " | ".join(_md_cell(c) for c in r) + " |" for r in t.rows]
        out.append("")
        out += [*(f"- {_md_line(n)}" for n in t.all_notes), ""] if t.all_notes else []
        out += [f"_{t.caveat}_", ""]
    return "\n".join(out)


# ---------------------------------------------------------------------------------------------
# CSV


def csv_cell(x: Any, *, integer: bool = False) -> Any:
    """CSV cell: missing and non-finite numbers become empty (never 'inf' or 'nan'); booleans as
    true/false; never '-0.0'; ``integer``: a whole float is written as an integer.

    >>> csv_cell(None), csv_cell(True), csv_cell(float("nan")), csv_cell(-0.0), csv_cell(35.0, integer=True)
    ('', 'true', '', 0.0, 35)
    """
    if x is None:
        return ""
    if isinstance(x, bool):
        return "true" if x else "false"
    if isinstance(x, float):
        if not math.isfinite(x):
            return ""
        if x == 0:
            x = 0.0  # -0.0 -> 0.0
        if integer and x.is_integer() and abs(x) < 2**53:
            return int(x)
    return x


def _overflow_note(columns: Sequence[str], row: Sequence[Any]) -> str:
    """Names the cells left empty because their value is infinite (for the row's note)."""
    inf = [c for c, x in zip(columns, row) if isinstance(x, float) and math.isinf(x)]
    return f"{', '.join(inf)}: {BEYOND} (no finite value, left empty)" if inf else ""


def csv_text(columns: Sequence[str], rows: Iterable[Sequence[Any]], *,
             integer_rows: Sequence[bool] | None = None) -> str:
    """One header row then the rows (floats written at full precision by the csv module).

    Columns named in :data:`INTEGER_COLUMNS` (and every number of a row flagged in
    ``integer_rows``) are written as integers when whole. An infinite number is written empty;
    when there is a ``note`` column it says which cells overflowed.
    """
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(columns)
    note_at = columns.index("note") if "note" in columns else None
    for i, r in enumerate(rows):
        if len(r) != len(columns):
            raise ValueError(f"row {r!r} does not have {len(columns)} cells")
        whole_row = bool(integer_rows[i]) if integer_rows else False
        cells = [csv_cell(x, integer=whole_row or c in INTEGER_COLUMNS) for c, x in zip(columns, r)]
        if note_at is not None and (extra := _overflow_note(columns, r)):
            cells[note_at] = "; ".join(x for x in (cells[note_at], extra) if x)
        w.writerow(cells)
    return buf.getvalue()


def to_csv(table: Table) -> str:
    """A table of raw values as CSV (see :func:`csv_text`)."""
    return csv_text(table.headers, table.rows, integer_rows=table.integer_rows or None)
