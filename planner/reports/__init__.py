"""Reports: one table model, rendered to the terminal, Markdown, CSV and HTML; plots; files.

How a result becomes what a person reads::

    result (planning) ─> cells.py (one string per figure, formats.py's formatters)
                      ─> text.py (report tables)   tables.py (compact terminal views)
                         csvtables.py (raw values)
                      ─> table.Table ─> table.to_markdown | table.to_csv | html.table_html
                                        | terminal.print_table
    files.py writes the out directory's files (atomically, through planner.store.fileio);
    plots.py (with plotkit.py) draws the PNGs; whatif.py saves a what-if answer;
    jsondoc.py is the one JSON-safe conversion for the files and ``--json``.

Only the light modules are re-exported here (importing this package pulls in neither
matplotlib nor the planning stage); import :mod:`planner.reports.files` for ``write_all``.

>>> from planner.reports import Table, to_markdown, num
>>> num(0.0001234), Table(title="t", headers=["a"], rows=[["1"]]).rows
('0.000123', (('1',),))
"""

from planner.reports.formats import (
    BEYOND,
    CAVEAT,
    DIGITS,
    EXTRAPOLATED,
    INTERVAL_NOTE,
    UNDERFLOW,
    estimate,
    interval,
    num,
    percent,
    rate,
    span,
)
from planner.reports.jsondoc import json_safe, json_text
from planner.reports.table import Table, TextTable, csv_text, to_csv, to_markdown

__all__ = ["BEYOND", "CAVEAT", "DIGITS", "EXTRAPOLATED", "INTERVAL_NOTE", "UNDERFLOW", "Table", "TextTable",
           "csv_text", "estimate", "interval", "json_safe", "json_text", "num", "percent", "rate", "span",
           "to_csv", "to_markdown"]
