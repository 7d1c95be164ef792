"""The sweep job: sample a target's grid into an out directory, to the budget's stopping rule
(uniform) or until the answers are precise (targeted, with planning's assessment wired into the
driver). Also the sampling half of the main job (``planner run``).

Ctrl-C keeps every finished chunk; a rerun tops up from there (:data:`INTERRUPTED` says so).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from pathlib import Path

import sinter
from rich.console import Console

from planner.config import Target
from planner.errors import InputError
from planner.planning.precision import DEFAULT_FOCUS, assess, check_focus
from planner.sampling import (
    MIN_ERRORS,
    SweepSummary,
    TargetedLimits,
    TargetedSummary,
    check_workers,
    parse_cluster,
    parse_shard,
    run_sweep,
)
from planner.sampling import run_targeted as run_targeted_with
from planner.sampling.targeted import MAX_CPU_SECONDS_PER_TASK, MAX_ROUNDS
from planner.store import SampleStore, out_dir_lock, writable_dir
from planner.sweep import StoppingRule, SweepPlan, plan_sweep, reach_tasks

#: what a command says when Ctrl-C stopped a sweep
INTERRUPTED = "interrupted: finished chunks are saved; run the same command again to resume"


def run_targeted(tasks: Sequence[sinter.Task], *, store: SampleStore, target: Target, precision: float,
                 workers: int | None = None, cluster: str | None = None, console: Console | None = None,
                 max_cpu_seconds_per_task: float = MAX_CPU_SECONDS_PER_TASK,
                 budget_cap: StoppingRule | None = None, focus: Sequence[str] = DEFAULT_FOCUS,
                 min_errors: int = MIN_ERRORS, max_rounds: int = MAX_ROUNDS,
                 write_manifest: bool = True) -> TargetedSummary:
    """Sample ``tasks`` until every tracked answer (``focus``: see planning's ``assess``) has a
    relative 95% half-width of at most ``precision``, or the caps stop the tasks that would
    still help (:func:`planner.sampling.targeted.run_targeted` with planning's assessment)."""
    focus = check_focus(focus)

    def assessment(stats: list[sinter.TaskStats]):  # noqa: ANN202 - planning's Assessment
        return assess(stats, target, precision=precision, focus=focus)

    limits = TargetedLimits(max_cpu_seconds_per_task=max_cpu_seconds_per_task, budget_cap=budget_cap,
                            min_errors=min_errors, max_rounds=max_rounds)
    return run_targeted_with(tasks, store=store, target=target, precision=precision, assess=assessment,
                             workers=workers, cluster=cluster, console=console, limits=limits,
                             write_manifest=write_manifest)


@dataclasses.dataclass(frozen=True)
class SamplingChoice:
    """How a sweep samples: engine (``workers`` or ``cluster``), a share (``shard``), and
    uniform to the budget or targeted (``precision``, with the budget as a cap if ``budget`` was
    given)."""

    budget: str | None = None
    workers: int | None = None
    cluster: str | None = None
    shard: tuple[int, int] | None = None
    precision: float | None = None

    @classmethod
    def checked(cls, *, budget: str | None = None, workers: int | None = None, cluster: str | None = None,
                shard: str | None = None, precision: float | None = None) -> SamplingChoice:
        """The choice, checked before anything slow happens (InputErrors naming the field)."""
        shard_kn = parse_shard(shard) if shard is not None else None
        check_workers(workers)
        if cluster is not None:
            parse_cluster(cluster)
            if shard_kn is not None:
                raise InputError("cannot be combined with a cluster: a shard job samples locally",
                                 field="shard")
            if workers is not None:
                raise InputError("is for local sampling; with a cluster its workers are used "
                                 "(local:N sets their number)", field="workers")
        if precision is not None and shard_kn is not None:
            raise InputError("cannot be combined with a precision target: a targeted sweep plans "
                             "the shots of all tasks together (use a cluster to spread it)",
                             field="shard")
        return cls(budget=budget, workers=workers, cluster=cluster, shard=shard_kn, precision=precision)

    def describe(self, plan: SweepPlan) -> str:
        """One phrase: what sampling stops at."""
        rule = f"{plan.rule.max_errors} errors or {plan.rule.max_shots:,} shots per task"
        if self.precision is None:
            return f"budget '{plan.budget}' ({rule})"
        return f"precision {self.precision:g}" + (f", each task capped at {rule}" if self.budget else "")


def sample(plan: SweepPlan, *, target: Target, out_dir: Path, choice: SamplingChoice,
           console: Console) -> SweepSummary | TargetedSummary:
    """Sample ``plan`` into ``out_dir``: to the budget's stopping rule, or (``choice.precision``)
    until the answers reach that relative width with the budget, if one was given, as a cap per
    task. KeyboardInterrupt passes through (every finished chunk is on disk)."""
    store = SampleStore(out_dir)
    if choice.precision is not None:
        return run_targeted(plan.tasks, store=store, target=target, precision=choice.precision,
                            workers=choice.workers, cluster=choice.cluster, console=console,
                            budget_cap=plan.rule if choice.budget is not None else None)
    return run_sweep(plan.tasks, store=store, rule=plan.rule, workers=choice.workers,
                     cluster=choice.cluster, shard=choice.shard, console=console, target=target,
                     budget=plan.budget)


def plan_with_reach(target: Target, budget: str = "quick") -> SweepPlan:
    """The target's grid (:func:`planner.sweep.plan_sweep`) and, when its goal distance lies far
    beyond the grid's distances, the joint axis at the distances between them
    (:func:`planner.sweep.reach_tasks`, ``sweep.reach_distances``); largest circuits first."""
    from planner.planning.ask import goal_distance

    plan = plan_sweep(target, budget=budget)
    extra = reach_tasks(target, goal_distance=goal_distance(target))
    if not extra:
        return plan
    tasks = sorted([*plan.tasks, *extra], key=lambda t: -t.json_metadata["d"] * t.json_metadata["rounds"])
    return dataclasses.replace(plan, tasks=tuple(tasks))


def sweep_job(target: Target, *, out_dir: Path, choice: SamplingChoice,
              console: Console) -> SweepSummary | TargetedSummary:
    """The ``planner sweep`` job: plan the target's grid and sample it into ``out_dir``."""
    if out_dir.exists() and not out_dir.is_dir():
        raise InputError("exists and is not a directory", field="out_dir", source=str(out_dir))
    plan = plan_with_reach(target, budget=choice.budget or "quick")
    # the samplers say what they sample once the out directory has been checked
    return sample(plan, target=target, out_dir=out_dir, choice=choice, console=console)


def prepare_main(target: Target, *, out_dir: Path, choice: SamplingChoice) -> tuple[SweepPlan, Path]:
    """The sampling half of ``planner run``, before it samples: the plan and the out directory,
    checked and its lock tried before any chatter (a sweep sampling there is refused in one
    line). Then :func:`sample`."""
    plan = plan_with_reach(target, budget=choice.budget or "quick")
    out_dir = writable_dir(out_dir)
    with out_dir_lock(out_dir):
        pass
    return plan, out_dir
