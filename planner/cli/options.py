"""Option types shared by several commands, so each reads and documents the same way."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.config import Target

OutOpt = Annotated[Path | None, typer.Option(
    "--out", help="Out directory (default: out/<target file stem>).", rich_help_panel="Output")]
WorkersOpt = Annotated[int | None, typer.Option(
    "--workers", min=1, help="Worker processes for local sampling (default: all cores).",
    rich_help_panel="Sampling")]
def _budget_name(value: str | None) -> str | None:
    """Check --budget while the command line is parsed: an empty or unknown name is refused, never
    read as the default."""
    if value is None:
        return None
    from planner.sweep import BUDGETS

    if value not in BUDGETS:
        raise typer.BadParameter(f"{value!r} is not a budget; allowed: {', '.join(BUDGETS)}")
    return value


BudgetOpt = Annotated[str | None, typer.Option(
    "--budget", help="Stopping rule per task: quick (demo, minutes; the default), standard, overnight.",
    callback=_budget_name, rich_help_panel="Sampling")]
PrecisionOpt = Annotated[float | None, typer.Option(
    "--precision", metavar="REL", help="Sample until Lambda per point, the model weights that matter "
    "and the joint-factor answer reach a relative 95% half-width of REL (e.g. 0.05), putting shots "
    "where they help most; --budget then only caps each task.", rich_help_panel="Sampling")]
QuietOpt = Annotated[bool, typer.Option(
    "--quiet", "-q", help="No progress or chatter on stderr (batch jobs).", rich_help_panel="Output")]
JsonOpt = Annotated[bool, typer.Option(
    "--json", help="Print one JSON object on stdout and nothing else there.", rich_help_panel="Output")]


def default_out_dir(target: Target) -> Path:
    """``out/<target name>``: where a command writes when ``--out`` is not given."""
    return Path("out") / target.name


#: Finest --precision. A relative 95% half-width REL needs about (1.96 / REL)**2 errors on every
#: point that matters: 4 million at 1e-3, 40 times the overnight budget's 100,000 per task; finer
#: would never finish, and the model's own misfit is wider than that anyway.
MIN_PRECISION = 1e-3


def check_precision(precision: float | None) -> None:
    """--precision is a relative half-width: MIN_PRECISION <= REL < 1.

    >>> check_precision(0.05)
    >>> check_precision(2.0)
    Traceback (most recent call last):
    ...
    planner.errors.InputError: precision: 2 is not allowed: give a relative 95% half-width from 0.001 to below 1 (0.05 means +-5%)
    """
    from planner.errors import InputError

    if precision is not None and not MIN_PRECISION <= precision < 1:
        raise InputError(f"{precision:g} is not allowed: give a relative 95% half-width "
                         f"from {MIN_PRECISION:g} to below 1 (0.05 means +-5%)", field="precision")
