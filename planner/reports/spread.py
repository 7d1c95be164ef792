"""The spread report: one table (median and worse tenth per distance, and Lambda), rendered to
the terminal and written as spread.md, spread.csv and spread.json."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from rich.console import Console

from planner.fits import CONFIDENCE
from planner.planning.spread import SpreadSummary
from planner.reports.formats import interval
from planner.reports.jsondoc import json_file_text
from planner.reports.table import Table, csv_text, to_markdown
from planner.reports.terminal import print_table
from planner.store.fileio import atomic_write

SPREAD_FILES = ("spread.md", "spread.csv", "spread.json")
SPREAD_COLUMNS = ("figure", "d", "percentile", "best", "low", "high")


def _how(s: SpreadSummary) -> str:
    if s.draw == "table":
        return "each qubit's values resampled from the qubits of its role in the table (pairs from the pairs)"
    given = ", ".join(f"{k} {v:g}" for k, v in s.sigmas.items() if v) or "all 0"
    return f"each value times a log-normal factor (sigma: {given})"


def spread_table(s: SpreadSummary) -> Table:
    rows: list[tuple[str, ...]] = [
        (f"eps per cycle, d={d}", interval(s.eps_listed.get(d)), interval(s.eps_median[d]),
         interval(s.eps_worse[d])) for d in s.distances]
    rows.append(("Lambda", interval(s.lambda_listed), interval(s.lambda_median), interval(s.lambda_worse)))
    return Table(
        title=f"Spread over {s.instances} device instances", key="spread",
        headers=("figure", "as listed", "median", "worse tenth of chips"), rows=rows,
        lead=(f"Instances: {_how(s)}; seed {s.seed}.",),
        notes=("as listed: the target's model itself (its table, no draw); "
               f"worse tenth: the 90th percentile of the logical error per cycle and the 10th of Lambda; "
               f"{CONFIDENCE:.0%} intervals include the finite number of instances and each instance's "
               "sampling", *s.notes))


def spread_csv(s: SpreadSummary) -> str:
    rows: list[tuple[Any, ...]] = []
    for d in s.distances:
        for q, iv in (("50", s.eps_median[d]), ("90", s.eps_worse[d])):
            rows.append(("logical_error_per_cycle", d, q, iv.best, iv.low, iv.high))
    for d, iv in sorted(s.eps_listed.items()):
        rows.append(("logical_error_per_cycle", d, "as listed", iv.best, iv.low, iv.high))
    for q, lam in (("as listed", s.lambda_listed), ("50", s.lambda_median), ("10", s.lambda_worse)):
        if lam is not None:
            rows.append(("lambda", "", q, lam.best, lam.low, lam.high))
    return csv_text(SPREAD_COLUMNS, rows)


def render_spread(s: SpreadSummary, console: Console) -> None:
    print_table(console, spread_table(s))


def write_spread(s: SpreadSummary, out_dir: Path) -> list[Path]:
    """spread.md, spread.csv and spread.json under ``out_dir`` (atomically)."""
    out_dir = Path(out_dir)
    texts = (to_markdown([spread_table(s)], heading="Planning for a spread of qubits"), spread_csv(s),
             json_file_text(s.to_json()))
    paths = [out_dir / name for name in SPREAD_FILES]
    for path, text in zip(paths, texts):
        atomic_write(path, text.encode())
    return paths
