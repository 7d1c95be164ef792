"""What-if answers of ``planner ask`` saved on request, never over the review's own files.

A what-if (a --target, --distance or --qubits other than the target's goal) answers a different
question than report.html: it goes to stdout, and to a file only with ``--save PATH.md`` (the CSV
lands next to it). Inside the out directory only ``whatif-*.md`` names are taken, so the review's
``requirements.md`` and the rest stay as ``planner run`` wrote them.
"""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING

from planner.errors import InputError
from planner.fits import Interval
from planner.reports import text
from planner.reports.csvtables import requirements_csv
from planner.reports.files import write_atomic
from planner.reports.table import to_csv, to_markdown

if TYPE_CHECKING:
    from planner.planning import Requirements, Uncertainty

#: inside the out directory a saved answer must be named like this (glob)
WHAT_IF_PATTERN = "whatif-*.md"


def default_name(asked: dict[str, float | int]) -> str:
    """A file name saying what was asked.

    >>> default_name({"distance": 15}), default_name({"eps_target": 1e-9, "qubits": 500})
    ('whatif-d15.md', 'whatif-eps1e-09-q500.md')
    """
    parts = [f"{key}{asked[name]:g}" if isinstance(asked[name], float) else f"{key}{asked[name]}"
             for name, key in (("eps_target", "eps"), ("distance", "d"), ("qubits", "q")) if name in asked]
    return "whatif-" + "-".join(parts or ["goal"]) + ".md"


def check_save_path(path: Path, out_dir: Path) -> tuple[Path, Path]:
    """The Markdown and CSV paths for ``--save PATH`` (InputError for a name that would replace
    a report file of ``out_dir``, or that does not end in .md)."""
    path = Path(path)
    if path.suffix != ".md" or path.name == ".md":
        raise InputError(f"--save: {path} is not allowed: give a file name ending in .md "
                         "(the CSV is written next to it)")
    csv_path = path.with_suffix(".csv")
    inside = path.resolve().parent == Path(out_dir).resolve()
    if inside and not path.match(WHAT_IF_PATTERN):
        raise InputError(f"--save: {path} is not allowed: inside the out directory only "
                         f"{WHAT_IF_PATTERN} names are taken (the other files are the review's)")
    return path, csv_path


def write_what_if(req: Requirements, md_path: Path, csv_path: Path, *, question: str,
                  lambda_today_model: Interval | None = None, uncertainty: Uncertainty | None = None) -> list[Path]:
    """The requirement tables of an answer, headed by the what-if ``question`` it answers (empty:
    the goal's own answer, saved to another place)."""
    md = to_markdown(text.requirements_tables(req, lambda_today_model=lambda_today_model, uncertainty=uncertainty),
                     heading=f"What-if: {question} (not the review's goal)" if question
                     else "Requirements for the goal")
    return [write_atomic(md_path, md),
            write_atomic(csv_path, to_csv(requirements_csv(req, lambda_today_model=lambda_today_model)))]
