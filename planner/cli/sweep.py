"""`planner sweep`: sample the target's grid into the out directory (resumable, shardable)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Any

import typer
from rich.console import Console

from planner.cli._common import one_line_errors, stderr_console
from planner.cli.options import (BudgetOpt, OutOpt, PrecisionOpt, QuietOpt, WorkersOpt, check_precision,
                                 default_out_dir)

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
    from planner.errors import InputError
    from planner.sampling import check_workers, parse_shard

    # check option syntax before anything slow happens
    shard_kn = parse_shard(shard) if shard is not None else None
    check_workers(workers)
    if cluster is not None:
        from planner.cluster import parse_cluster

        parse_cluster(cluster)
        if shard_kn is not None:
            raise InputError("--shard and --cluster cannot be combined: a shard job samples locally")
        if workers is not None:
            raise InputError("--workers is for local sampling; with --cluster the cluster's "
                             "workers are used (local:N sets their number)")
    check_precision(precision)
    if precision is not None and shard_kn is not None:
        raise InputError("--precision and --shard cannot be combined: a targeted sweep plans the "
                         "shots of all tasks together (use --cluster to spread it)")
    spec = load_target(target)
    out_dir = out if out is not None else default_out_dir(spec)
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError(f"{out_dir}: --out exists and is not a directory")

    from planner.sweep import plan_sweep

    err = stderr_console(quiet=quiet)
    plan = plan_sweep(spec, budget=budget or "quick")
    # the samplers say what they sample once the out directory has been checked
    sample(plan, target=spec, out_dir=out_dir, budget_given=budget is not None, precision=precision,
           workers=workers, cluster=cluster, shard=shard_kn, console=err)


def sample(plan: Any, *, target: Any, out_dir: Path, budget_given: bool, precision: float | None,
           workers: int | None, cluster: str | None, shard: tuple[int, int] | None,
           console: Console) -> None:
    """Sample a plan into ``out_dir``: to the budget's stopping rule, or (``precision``) until the
    answers reach that relative width with the budget, if one was given, as a cap per task.
    Ctrl-C keeps every finished chunk and exits 130."""
    from planner.sampling import run_sweep
    from planner.store import SampleStore

    store = SampleStore(out_dir)
    try:
        if precision is not None:
            from planner.precision import run_targeted

            run_targeted(plan.tasks, store=store, target=target, precision=precision,
                         workers=workers, cluster=cluster, console=console,
                         budget_cap=plan.rule if budget_given else None)
        else:
            run_sweep(plan.tasks, store=store, rule=plan.rule, workers=workers, cluster=cluster,
                      shard=shard, console=console, target=target, budget=plan.budget)
    except KeyboardInterrupt:
        # every finished chunk is already on disk; a rerun tops up from there
        console.print("interrupted: finished chunks are saved; run the same command again to resume")
        raise typer.Exit(code=130) from None
