"""`planner compare DIR_A DIR_B`: two devices (e.g. a hardware revision and the one before) side
by side, with the differences and whether they go beyond the intervals."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stdout_console
from planner.cli.options import JsonOpt


def register(app: typer.Typer) -> None:
    app.command("compare", no_args_is_help=True,
                help="Two out directories side by side: Lambda, eps per cycle, required factors, "
                "shares of 1/Lambda and roadmap dates, with B / A and whether the difference goes "
                "beyond the 95% intervals.")(compare_command)


@one_line_errors
def compare_command(
    dir_a: Annotated[Path, typer.Argument(help="Out directory of the reference device (A).")],
    dir_b: Annotated[Path, typer.Argument(help="Out directory of the device compared with it (B).")],
    out: Annotated[Path | None, typer.Option(
        "--out", help="Also write compare.md, compare.csv and compare.json into this directory.")] = None,
    json: JsonOpt = False,
) -> None:
    from planner.jobs.compare import compare_directories
    from planner.reports.compare import render_comparison, write_comparison
    from planner.reports.jsondoc import json_text

    if out is not None:
        from planner.reports.files import ensure_dir

        ensure_dir(out)  # a directory that cannot be made is refused before any planning
    comparison = compare_directories(dir_a, dir_b)
    if out is not None:
        say_written(write_comparison(comparison, out), out, quiet=json)
    if json:
        typer.echo(json_text(comparison.to_json()))
    else:
        render_comparison(comparison, stdout_console())
