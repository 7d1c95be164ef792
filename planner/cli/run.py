"""`planner run`: the main job. Sweep (resumable), fit, ask, roadmap, sensitivity; tables on
screen and files under the out directory."""

from __future__ import annotations

import time
from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, plain, stderr_console, stdout_console
from planner.cli.options import (BudgetOpt, OutOpt, PrecisionOpt, QuietOpt, WorkersOpt, check_precision,
                                 default_out_dir)


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
    from planner.sampling import check_workers

    check_workers(workers)
    spec = load_target(target)  # validate before anything heavy is imported
    check_precision(precision)
    from planner.planning import answer_all
    from planner.reports import tables
    from planner.lock import out_dir_lock
    from planner.manifest import writable_dir
    from planner.reports.files import write_all
    from planner.cli.sweep import sample
    from planner.store import SampleStore
    from planner.sweep import plan_sweep

    err = stderr_console(quiet=quiet)
    con = stdout_console()
    started = time.monotonic()
    plan = plan_sweep(spec, budget=budget or "quick")
    out_dir = writable_dir(out if out is not None else default_out_dir(spec))
    with out_dir_lock(out_dir):  # refuse now, before any chatter, if a sweep samples there
        pass
    rule = f"{plan.rule.max_errors} errors or {plan.rule.max_shots:,} shots per task"
    how = (f"precision {precision:g}" + (f", each task capped at {rule}" if budget else "")
           if precision is not None else f"budget '{plan.budget}' ({rule})")
    err.print(f"[bold]{plain(spec.device.name)}[/]: {len(plan.tasks)} tasks over {len(plan.points)} scale "
              f"points, {how} -> {plain(out_dir)}")
    sample(plan, target=spec, out_dir=out_dir, budget_given=budget is not None, precision=precision,
           workers=workers, cluster=None, shard=None, console=err)
    store = SampleStore(out_dir)
    answers = answer_all(spec, store.stats(), seed=0)
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
    err.print(f"wrote {len(written)} files under {plain(out_dir)} (report.html has it all on one page)")
    err.print(f"done in {time.monotonic() - started:.0f} s. Projections are model-based: check them "
              "against the device before relying on them.")
