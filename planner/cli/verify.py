"""`planner verify DIR`: sample at the proposed operating points and compare with the prediction."""

from __future__ import annotations

from pathlib import Path
from typing import TYPE_CHECKING, Annotated

import typer

from planner.cli._common import one_line_errors, stderr_console, stdout_console
from planner.cli.options import BudgetOpt, JsonOpt, QuietOpt, WorkersOpt

if TYPE_CHECKING:
    from planner.config import Target
    from planner.planning import Answers
    from planner.planning.verify import Verification

DirArg = Annotated[Path, typer.Argument(help="Out directory of a sweep; samples go to DIR/verify/.")]
MaxCpuOpt = Annotated[float, typer.Option(
    "--max-cpu", metavar="SECONDS", help="CPU seconds verify may spend (estimated and printed before "
    "sampling): the distances above the fit are refused beyond it, the goal distance is sampled only "
    "when it fits too. Default: 28800 (8 h, an overnight run on one machine).", rich_help_panel="Sampling")]


def register(app: typer.Typer) -> None:
    app.command("verify", no_args_is_help=True,
                help="Sample the joint-factor answer and the cheapest mix beyond the fit (d_max + 2, "
                "d_max + 4, and the goal distance when its estimated CPU time fits --max-cpu; r = d and 3d "
                "rounds each); print predicted vs sampled eps and Lambda (95% intervals), flag a prediction "
                "that misses, and write them to DIR/verify.md, .csv and .json (and into report.html when "
                "DIR has one).")(verify_command)


@one_line_errors
def verify_command(directory: DirArg, json: JsonOpt = False, workers: WorkersOpt = None,
                   budget: BudgetOpt = "quick", quiet: QuietOpt = False,
                   max_cpu: MaxCpuOpt = 8 * 3600.0) -> None:
    from planner.jobs.review import review
    from planner.jobs.verify import run_verification
    from planner.store import writable_dir
    from planner.planning import no_model_reason
    from planner.reports.tables import json_text
    from planner.reports.terminal import print_table
    from planner.reports.verifyreport import verify_tables

    reviewed = review(directory)
    target, answers = reviewed.target, reviewed.answers
    writable_dir(directory / "verify", option="DIR/verify")
    if answers.model is None:
        note = no_model_reason(answers.fits)
        typer.echo(json_text({"verification": None, "note": note})) if json else stdout_console().print(note)
        return
    err = stderr_console(quiet=quiet or json)
    result = run_verification(target, answers, out_dir=directory, budget=budget or "quick", workers=workers,
                              console=err, max_cpu_seconds=max_cpu)
    written = [p.name for p in _write_files(result, answers, target, directory)]
    own = [n for n in written if n.startswith("verify.")]
    err.print(f"wrote {', '.join(own)} under {directory}" + (
        f"; rewrote report.html with it (and the {len(written) - len(own) - 1} other report files, "
        "from the same answers)" if "report.html" in written else
        "; `planner run` puts it into report.html"), markup=False, highlight=False)  # a path prints as written
    if json:
        typer.echo(json_text(result.to_json()))
        return
    out = stdout_console()
    for table in verify_tables(result):
        print_table(out, table)


def _write_files(result: Verification, answers: Answers, target: Target, directory: Path) -> list[Path]:
    """verify.md/.csv/.json; and, where the out directory already has a report.html, the whole
    report again (same answers as `planner run`), so the page shows the verification and its
    tables and plots agree with it. Without a report.html, `planner run` includes verify.json
    in the page it writes next."""
    from planner.reports.files import write_all, write_verification

    if (directory / "report.html").is_file():
        return write_all(answers, out_dir=directory, target=target, verification=result)
    return write_verification(result, directory)
