"""`planner sensitivity DIR`: which component holds the device back most."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stdout_console
from planner.cli.options import JsonOpt

DirArg = Annotated[Path, typer.Argument(help="Out directory of a sweep.")]


def register(app: typer.Typer) -> None:
    app.command("sensitivity", no_args_is_help=True,
                help="Per component: share of the 1/Lambda budget, elasticity, Lambda if halved or "
                "perfect, months earlier with faster improvement.")(sensitivity_command)


@one_line_errors
def sensitivity_command(directory: DirArg, json: JsonOpt = False) -> None:
    from planner.jobs.review import review
    from planner.planning import no_model_reason
    from planner.reports.jsondoc import json_text
    from planner.reports.tables import render_sensitivity

    answers = review(directory).answers
    if answers.sensitivity is None:
        note = no_model_reason(answers.fits)
        typer.echo(json_text({"sensitivity": None, "note": note})) if json else stdout_console().print(note)
        return
    from planner.reports.cells import lumped_components
    from planner.reports.files import write_sensitivity

    say_written(write_sensitivity(answers.sensitivity, directory, lumped=lumped_components(answers)),
                directory, quiet=json)
    if json:
        typer.echo(json_text(answers.sensitivity.to_json()))
        return
    render_sensitivity(answers.sensitivity, stdout_console())
