"""`planner spread TARGET`: plan for a spread of qubits: draw device instances, sample each, and
print the median and the worse tenth of chips (logical error per cycle per distance, Lambda)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, say_written, stderr_console, stdout_console
from planner.cli.options import BudgetOpt, JsonOpt, QuietOpt, WorkersOpt


def register(app: typer.Typer) -> None:
    app.command("spread", no_args_is_help=True,
                help="Draw device instances from the target's per-qubit table (resampled) or from its "
                "\\[device.spread] (a log-normal sigma per value), sample each at the target's distances, "
                "and print the median and the worse tenth of chips of the logical error per cycle and of "
                "Lambda (95% intervals); writes spread.md, .csv and .json under --out "
                "(default out/<target>/spread).")(spread_command)


@one_line_errors
def spread_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML).")],
    instances: Annotated[int | None, typer.Option(
        "--instances", "-n", metavar="N", help="Device instances to draw (default 10).",
        rich_help_panel="Spread")] = None,
    draw: Annotated[str | None, typer.Option(
        "--draw", metavar="table|spread", help="How to draw: resample the per-qubit table, or the "
        "stated \\[device.spread] (default: spread if stated, else table).", rich_help_panel="Spread")] = None,
    seed: Annotated[int, typer.Option("--seed", help="Seed of the draws (same seed, same instances).",
                                      rich_help_panel="Spread")] = 0,
    out: Annotated[Path | None, typer.Option(
        "--out", help="Out directory (default: out/<target file stem>/spread).", rich_help_panel="Output")] = None,
    budget: BudgetOpt = None,
    workers: WorkersOpt = None,
    json: JsonOpt = False,
    quiet: QuietOpt = False,
) -> None:
    from planner.config import load_target
    from planner.jobs.spread import DEFAULT_INSTANCES, SPREAD_RULE, check_instances, choose_draw, run_spread
    from planner.reports.jsondoc import json_text
    from planner.reports.spread import render_spread, write_spread
    from planner.store import writable_dir
    from planner.sweep import budget_rule

    spec = load_target(target)
    how = choose_draw(spec, draw)
    count = check_instances(DEFAULT_INSTANCES if instances is None else instances)
    rule = SPREAD_RULE if budget is None else budget_rule(budget)
    out_dir = writable_dir(out if out is not None else Path("out") / spec.name / "spread", option="--out")
    err = stderr_console(quiet=quiet or json)
    run = run_spread(spec, out_dir=out_dir, instances=count, draw=how, seed=seed, rule=rule, workers=workers,
                     console=err)
    written = write_spread(run.summary, out_dir)
    say_written(written, out_dir, quiet=quiet or json)
    if json:
        typer.echo(json_text(run.summary.to_json()))
        return
    render_spread(run.summary, stdout_console())
