"""`planner verify DIR`: sample at the proposed operating points and compare with the prediction."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, stderr_console, stdout_console
from planner.cli.options import BudgetOpt, JsonOpt, QuietOpt, WorkersOpt

DirArg = Annotated[Path, typer.Argument(help="Out directory of a sweep; samples go to DIR/verify/.")]


def register(app: typer.Typer) -> None:
    app.command("verify", no_args_is_help=True,
                help="Sample the joint-factor answer and the cheapest mix at the largest samplable "
                "distances; print predicted vs sampled eps and Lambda (95% intervals).")(verify_command)


@one_line_errors
def verify_command(directory: DirArg, json: JsonOpt = False, workers: WorkersOpt = None,
                   budget: BudgetOpt = "quick", quiet: QuietOpt = False) -> None:
    from planner.manifest import writable_dir
    from planner.planning import answer_all, load_out_dir, no_model_reason
    from planner.planning.verify import run_verification
    from planner.reports.tables import json_text, render_verify

    spec, stats = load_out_dir(directory)
    writable_dir(directory / "verify", option="DIR/verify")
    answers = answer_all(spec, stats)
    if answers.model is None:
        note = no_model_reason(answers.fits)
        typer.echo(json_text({"verification": None, "note": note})) if json else stdout_console().print(note)
        return
    result = run_verification(spec, answers, out_dir=directory, budget=budget, workers=workers,
                              console=stderr_console(quiet=quiet or json))
    if json:
        typer.echo(json_text(result.to_json()))
        return
    render_verify(result, stdout_console())
