"""`planner fit DIR`: the fits (eps per task, Lambda per point, threshold, model and its quality)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, plain, stderr_console, stdout_console
from planner.cli.options import JsonOpt

DirArg = Annotated[Path, typer.Argument(help="Out directory of a sweep (holds target.toml and samples/).")]


def register(app: typer.Typer) -> None:
    app.command("fit", no_args_is_help=True,
                help="Fit logical error per cycle and Lambda (95% intervals) from DIR's samples.")(fit_command)


@one_line_errors
def fit_command(directory: DirArg, json: JsonOpt = False) -> None:
    from planner.fits import fit_stats
    from planner.planning import fit_model, load_out_dir
    from planner.reports.tables import json_text, render_fits

    from planner.reports.files import write_fits

    spec, stats = load_out_dir(directory)
    report = fit_stats(stats)
    has_lambda = any(lf.suppression is not None for lf in report.lambdas)
    model = fit_model(report) if has_lambda else None
    from planner.planning import answer_all

    # fits.json holds every fitted figure, the model's and the answers' too, as `planner run` writes it
    written = write_fits(answer_all(spec, stats), directory, target=spec)
    stderr_console(quiet=json).print(f"wrote {', '.join(p.name for p in written)} under {plain(directory)}")
    if json:
        doc = report.to_json()
        doc["model"] = model.to_json() if model else None
        typer.echo(json_text(doc))
        return
    render_fits(report, stdout_console(), model)
