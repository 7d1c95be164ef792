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
BudgetOpt = Annotated[str, typer.Option(
    "--budget", help="Stopping rule per task: quick (demo, minutes), standard, overnight.",
    rich_help_panel="Sampling")]
QuietOpt = Annotated[bool, typer.Option(
    "--quiet", "-q", help="No progress or chatter on stderr (batch jobs).", rich_help_panel="Output")]
JsonOpt = Annotated[bool, typer.Option(
    "--json", help="Print one JSON object on stdout and nothing else there.", rich_help_panel="Output")]


def default_out_dir(target: Target) -> Path:
    return Path("out") / target.name
