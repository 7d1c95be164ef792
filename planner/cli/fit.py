"""`planner fit DIR`: the fits (eps per task, Lambda per point, threshold, model and its quality)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stdout_console
from planner.cli.options import JsonOpt

DirArg = Annotated[Path, typer.Argument(help="Out directory of a sweep (holds target.toml and samples/).")]


def register(app: typer.Typer) -> None:
    app.command("fit", no_args_is_help=True,
                help="Fit logical error per cycle and Lambda (95% intervals) from DIR's samples.")(fit_command)


@one_line_errors
def fit_command(directory: DirArg, json: JsonOpt = False) -> None:
    from planner.jobs.review import review
    from planner.reports.files import write_fits
    from planner.reports.tables import json_text, render_fits

    # one fit: fits.json holds every fitted figure, the model's and the answers' too, as
    # `planner run` writes it, and the table and --json show the same fit
    reviewed = review(directory)
    answers = reviewed.answers
    say_written(write_fits(answers, directory, target=reviewed.target), directory, quiet=json)
    if json:
        doc = answers.fits.to_json()
        doc["model"] = answers.model.to_json() if answers.model else None
        typer.echo(json_text(doc))
        return
    render_fits(answers.fits, stdout_console(), answers.model)
