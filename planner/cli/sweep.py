"""`planner sweep`: sample the target's grid into the out directory (resumable, shardable)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer

from planner.cli._common import one_line_errors, stderr_console
from planner.cli.options import (
    BudgetOpt,
    OutOpt,
    PrecisionOpt,
    QuietOpt,
    WorkersOpt,
    check_precision,
    default_out_dir,
)

ClusterOpt = Annotated[str | None, typer.Option(
    "--cluster", metavar="ADDRESS", help="Sample on dask: a scheduler address (tcp://host:8786) "
    "or local:N for a local cluster of N single-threaded worker processes. Waits: "
    "PLANNER_CLUSTER_TIMEOUT (s, default 30), PLANNER_WORKER_TIMEOUT (s, default 300); dask's "
    "own log lines: PLANNER_DASK_LOG_LEVEL (default critical).",
    rich_help_panel="Sampling")]
ShardOpt = Annotated[str | None, typer.Option(
    "--shard", metavar="K/N", help="Take job K's share (1..N) of the tasks and write "
    "samples/shard-K-of-N.csv (batch arrays; no dask). Reruns only top up.",
    rich_help_panel="Sampling")]


def register(app: typer.Typer) -> None:
    app.command("sweep", no_args_is_help=True,
                help="Sample the target's grid until every task meets the budget's stopping rule. "
                "Resumable: a rerun counts what DIR/samples already holds.")(sweep_command)


@one_line_errors
def sweep_command(
    target: Annotated[Path, typer.Argument(help="Target file (TOML).")],
    out: OutOpt = None,
    workers: WorkersOpt = None,
    budget: BudgetOpt = None,
    cluster: ClusterOpt = None,
    shard: ShardOpt = None,
    precision: PrecisionOpt = None,
    quiet: QuietOpt = False,
) -> None:
    from planner.config import load_target
    from planner.jobs.sweep import INTERRUPTED, SamplingChoice, sweep_job

    # check option syntax before anything slow happens
    choice = SamplingChoice.checked(budget=budget, workers=workers, cluster=cluster, shard=shard,
                                    precision=precision)
    check_precision(precision)
    spec = load_target(target)
    out_dir = out if out is not None else default_out_dir(spec)
    err = stderr_console(quiet=quiet)
    try:
        sweep_job(spec, out_dir=out_dir, choice=choice, console=err)
    except KeyboardInterrupt:
        err.print(INTERRUPTED)  # every finished chunk is already on disk
        raise typer.Exit(code=130) from None
