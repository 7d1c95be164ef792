"""`planner roadmap DIR`: dates the goal and the Lambda milestones are met at the expected rates."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stdout_console
from planner.cli.options import JsonOpt

DirArg = Annotated[Path, typer.Argument(help="Out directory of a sweep (its target.toml needs a roadmap section).")]


def register(app: typer.Typer) -> None:
    app.command("roadmap", no_args_is_help=True,
                help="Scale factors, Lambda and eps over time at the target's improvement rates; the "
                "date the goal is met and the Lambda milestones, with 95% ranges.")(roadmap_command)


@one_line_errors
def roadmap_command(directory: DirArg, json: JsonOpt = False) -> None:
    from planner.errors import InputError
    from planner.jobs.review import review
    from planner.planning import no_model_reason
    from planner.reports.jsondoc import json_text
    from planner.reports.tables import render_roadmap

    reviewed = review(directory)
    if reviewed.target.roadmap is None:
        raise InputError("missing section: add [roadmap] with start and rates", field="roadmap",
                         source=reviewed.target.source)
    answers = reviewed.answers
    if answers.roadmap is None:
        note = no_model_reason(answers.fits)
        typer.echo(json_text({"roadmap": None, "note": note})) if json else stdout_console().print(note)
        return
    from planner.reports.files import write_roadmap

    say_written(write_roadmap(answers.roadmap, directory), directory, quiet=json)
    if json:
        typer.echo(json_text(answers.roadmap.to_json()))
        return
    render_roadmap(answers.roadmap, stdout_console())
