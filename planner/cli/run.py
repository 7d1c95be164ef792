"""`planner run`: the main job. Sweep (resumable), fit, ask, roadmap, sensitivity; tables on
screen and files under the out directory."""

from __future__ import annotations

import time
from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, plain, stderr_console, stdout_console
from planner.cli.options import (
    BudgetOpt,
    OutOpt,
    PrecisionOpt,
    QuietOpt,
    WorkersOpt,
    check_precision,
    default_out_dir,
)


def register(app: typer.Typer) -> None:
    app.command("run", help="The main job: sweep (resumable), fit, then the requirement, roadmap and "
                "sensitivity tables, with files under the out directory.")(run_command)


@one_line_errors
def run_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML).", show_default=True)] = Path("targets/demo.toml"),
    out: OutOpt = None,
    workers: WorkersOpt = None,
    budget: BudgetOpt = None,
    precision: PrecisionOpt = None,
    quiet: QuietOpt = False,
) -> None:
    from planner.config import load_target
    from planner.jobs.sweep import INTERRUPTED, SamplingChoice, prepare_main, sample

    choice = SamplingChoice.checked(budget=budget, workers=workers, precision=precision)
    spec = load_target(target)  # validate before anything heavy is imported
    check_precision(precision)
    from planner.jobs.review import review
    from planner.reports import tables
    from planner.reports.files import write_all

    err = stderr_console(quiet=quiet)
    con = stdout_console()
    started = time.monotonic()
    plan, out_dir = prepare_main(spec, out_dir=out if out is not None else default_out_dir(spec),
                                 choice=choice)
    err.print(f"[bold]{plain(spec.device.name)}[/]: {len(plan.tasks)} tasks over {len(plan.points)} scale "
              f"points, {choice.describe(plan)} -> {plain(out_dir)}")
    try:
        sample(plan, target=spec, out_dir=out_dir, choice=choice, console=err)
    except KeyboardInterrupt:
        err.print(INTERRUPTED)  # every finished chunk is already on disk
        raise typer.Exit(code=130) from None
    answers = review(out_dir).answers  # the samples read back as every query command reads them
    tables.render_fits(answers.fits, con, model=answers.model, tasks=False)
    if answers.requirements is not None:
        tables.render_requirements(answers.requirements, con)
    if answers.roadmap is not None:
        tables.render_roadmap(answers.roadmap, con)
    if answers.sensitivity is not None:
        tables.render_sensitivity(answers.sensitivity, con)
    for note in answers.notes:
        con.print(f"note: {note}")
    written = write_all(answers, out_dir=out_dir, target=spec)
    err.print(f"wrote {len(written)} files under {plain(out_dir)} (report.html has it all on one page)",
              soft_wrap=True)
    err.print(f"done in {time.monotonic() - started:.0f} s. Projections are model-based: check them "
              "against the device before relying on them.", soft_wrap=True)
