"""`planner status`: per task shots, errors, interval width, and what is left of the budget."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from planner.cli._common import one_line_errors, plain, stdout_console
from planner.cli.options import JsonOpt, check_precision

if TYPE_CHECKING:
    from planner.jobs.status import StatusTable


def register(app: typer.Typer) -> None:
    app.command("status", no_args_is_help=True,
                help="Per task: shots, errors, relative width of the 95% interval of the logical "
                "error per shot, done or left against the budget recorded in DIR, and an "
                "estimate of the CPU time left.")(status_command)


@one_line_errors
def status_command(
    directory: Annotated[Path, typer.Argument(metavar="DIR", help="Out directory of a sweep.")],
    as_json: JsonOpt = False,
    precision: Annotated[float | None, typer.Option(
        "--precision", metavar="REL", help="Also show, per task, the interval width against this "
        "precision target and the estimated CPU time to reach it (see `planner sweep --precision`).",
        rich_help_panel="Precision")] = None,
) -> None:
    from planner.jobs.status import status_job

    check_precision(precision)
    report = status_job(directory, precision=precision)
    if as_json:
        from planner.reports.tables import json_text

        typer.echo(json_text(report.to_json()))  # non-finite numbers as null, never NaN/Infinity
        return
    _render(report.table())


def _render(table: StatusTable) -> None:
    from rich.table import Table

    out = Table(title=plain(table.title), caption=table.caption)
    for col, justify in table.columns:
        out.add_column(col, justify=justify)  # type: ignore[arg-type]
    for row in table.rows:
        out.add_row(*row)
    con = stdout_console()
    con.print(out)
    con.print(plain(table.footer))
