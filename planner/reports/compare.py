"""Two devices side by side: one table (terminal, Markdown) and its raw CSV and JSON forms."""

from __future__ import annotations

from pathlib import Path

from rich.console import Console

from planner.planning.compare import Comparison, ComparisonRow
from planner.reports.formats import CL, estimate, num, rate
from planner.reports.jsondoc import json_file_text
from planner.reports.table import Table, to_csv, to_markdown

COMPARE_FILES = ("compare.md", "compare.csv", "compare.json")
CSV_COLUMNS = ("quantity", "a_best", "a_low", "a_high", "b_best", "b_low", "b_high", "ratio_b_over_a",
               "change_months", "beyond_intervals", "note")


def _date(t: tuple | None) -> str:
    if not t or t[0] is None:
        return "beyond the horizon"
    best, lo, hi = t
    return f"{best} [{lo or '...'}, {hi or '...'}]" if (lo, hi) != (best, best) else str(best)


def _cells(r: ComparisonRow) -> tuple[str, str, str]:
    if r.kind == "date":
        m = r.change_months
        return _date(r.a_date), _date(r.b_date), "" if m is None else f"{m:+.1f} months"
    fmt = rate if r.kind == "rate" else lambda best, iv: estimate(best, iv)  # noqa: E731
    show = lambda iv: "none" if iv is None else fmt(iv.best, iv if r.has_intervals else None)  # noqa: E731
    if r.kind == "distance" and r.a is not None and r.b is not None:
        return show(r.a), show(r.b), f"{r.b.best - r.a.best:+g}"
    ratio = "" if r.ratio is None else f"x{num(r.ratio)}"
    return show(r.a), show(r.b), ratio


def comparison_table(c: Comparison) -> Table:
    rows = [(r.quantity, *_cells(r), r.verdict) for r in c.rows]
    notes = [f"A = {c.name_a}; B = {c.name_b}; change: B / A (dates: B - A); none: not reachable",
             f"vs intervals: beyond = the two {CL} do not overlap (a conservative test: overlapping intervals "
             "can still differ)", *[n for r in c.rows if r.note for n in [f"{r.quantity}: {r.note}"]][:1], *c.notes]
    return Table(title="Two devices side by side", headers=("quantity", "A", "B", "change", "vs intervals"),
                 rows=rows, notes=tuple(notes), left=(0, 4))


def comparison_csv(c: Comparison) -> Table:
    def ends(r: ComparisonRow, side: str) -> list:
        if r.kind == "date":
            t = getattr(r, f"{side}_date") or (None, None, None)
            return [x.isoformat() if x else None for x in t]
        iv = getattr(r, side)
        return [None] * 3 if iv is None else [iv.best, iv.low if r.has_intervals else None,
                                              iv.high if r.has_intervals else None]

    rows = [(r.quantity, *ends(r, "a"), *ends(r, "b"), r.ratio, r.change_months,
             "" if r.beyond_intervals is None else str(r.beyond_intervals).lower(), r.note) for r in c.rows]
    return Table(title="compare", headers=CSV_COLUMNS, rows=rows)


def render_comparison(c: Comparison, console: Console) -> None:
    from planner.reports.terminal import print_table

    print_table(console, comparison_table(c))


def write_comparison(c: Comparison, out_dir: Path) -> list[Path]:
    """``compare.md``, ``compare.csv`` and ``compare.json`` in ``out_dir``."""
    from planner.reports.files import write_atomic

    md, csv, js = (Path(out_dir) / n for n in COMPARE_FILES)
    return [write_atomic(md, to_markdown([comparison_table(c)], heading=f"{c.name_a} vs {c.name_b}")),
            write_atomic(csv, to_csv(comparison_csv(c))), write_atomic(js, json_file_text(c.to_json()))]
