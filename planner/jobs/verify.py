"""The verify job: sample the proposed operating points beyond the fit into ``DIR/verify`` and
compare them with the model's prediction (the comparison and the cost arithmetic are pure:
:mod:`planner.planning.verify`).

Order of work: the CPU estimate of every distance is printed first (shots to the stopping rule
at the predicted rates, times a cost per detector per shot); d_max + 2 and d_max + 4 are sampled
(refused, before anything is sampled, when they alone exceed ``max_cpu_seconds``); then the goal
distance is estimated again with the cost per detector measured on them and sampled when the
total fits ``max_cpu_seconds``, skipped (and said so) when not.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import sinter

from planner.config import Target
from planner.errors import InputError
from planner.planning import Answers
from planner.planning.verify import (
    CpuEstimate,
    OperatingPoint,
    Verification,
    compare,
    goal_to_verify,
    operating_points,
    task_shots,
    verify_distances,
    verify_rounds,
)
from planner.sweep import StoppingRule

__all__ = ["DEFAULT_MAX_CPU_SECONDS", "GOAL_ERRORS", "Verification", "compare", "cpu_text", "operating_points",
           "run_verification", "verify_distances"]

#: default allowance: an overnight run on one machine (8 h of CPU)
DEFAULT_MAX_CPU_SECONDS = 8 * 3600.0
#: errors per task at the goal distance (about +-20% on each task's rate at 95%): the goal's
#: rate is far below the others', so the budget's error count would cost days there
GOAL_ERRORS = 100
#: shots per task at the goal distance at most
GOAL_MAX_SHOTS = 10**9
GOAL_RULE = StoppingRule(max_errors=GOAL_ERRORS, max_shots=GOAL_MAX_SHOTS)
#: what the first estimate of the goal distance says (it is decided after the others are sampled)
PENDING = "to be decided against --max-cpu"


def _tasks(target: Target, points: Sequence[OperatingPoint], distance: int) -> list[sinter.Task]:
    from planner.sweep import tasks_at_rounds

    return [t for p in points for t in tasks_at_rounds(target, p.scales, distance=distance,
                                                       rounds=verify_rounds(distance), label=p.label,
                                                       factor=p.factor)]


def _work(tasks: Sequence[sinter.Task]) -> list[tuple[dict[str, float], int, int]]:
    """(scales, rounds, detectors) of each task."""
    return [(t.json_metadata["scales"], int(t.json_metadata["rounds"]), t.circuit.num_detectors) for t in tasks]


def _goal_work(target: Target, points: Sequence[OperatingPoint], distance: int) -> list[tuple[dict[str, float], int, int]]:
    """(scales, rounds, detectors) of the goal distance's tasks, counted without building them."""
    from planner.config.limits import memory_circuit_size
    from planner.sweep import bases_for

    code = target.sweep.code
    return [(p.scales, r, memory_circuit_size(code=code, distance=distance, rounds=r)[1])
            for p in points for r in verify_rounds(distance) for _ in bases_for(target)]


def _estimate(answers: Answers, work: Sequence[tuple[dict[str, float], int, int]], *, distance: int,
              rule: StoppingRule, seconds_per_detector: float) -> CpuEstimate:
    """Shots each task takes to ``rule`` at its predicted rate, and their CPU time."""
    shots, seconds = 0, 0.0
    for scales, rounds, detectors in work:
        eps = answers.model.logical_error_per_cycle(scales, distance) if answers.model else 0.0
        n = task_shots(eps=eps, rounds=rounds, max_errors=rule.max_errors, max_shots=rule.max_shots)
        shots += n
        seconds += n * detectors * seconds_per_detector
    return CpuEstimate(distance=distance, tasks=len(work), shots=shots, seconds=seconds,
                       seconds_per_detector=seconds_per_detector, sampled=True)


def cpu_text(c: CpuEstimate) -> str:
    """One line of the estimate printed before sampling.

    >>> cpu_text(CpuEstimate(distance=21, tasks=8, shots=12_000_000, seconds=7200.0,
    ...                      seconds_per_detector=1.5e-8, sampled=False, why="over --max-cpu"))
    'd=21: 8 tasks, 1.2e+07 shots, about 2 h of CPU (at 1.5e-08 s per detector per shot): not sampled: over --max-cpu'
    """
    hours = c.seconds / 3600
    when = f"{hours:.3g} h" if hours >= 1 else f"{c.seconds / 60:.3g} min" if c.seconds >= 60 else f"{c.seconds:.3g} s"
    state = "" if c.why.startswith(PENDING) else "sampling" if c.sampled else "not sampled"
    said = ": " + ": ".join(x for x in (state, c.why) if x)
    return (f"d={c.distance}: {c.tasks} tasks, {c.shots:.2g} shots, about {when} of CPU "
            f"(at {c.seconds_per_detector:.2g} s per detector per shot){said}")


def _measured_cost(stats: Sequence[sinter.TaskStats], tasks: Sequence[sinter.Task], prior: float) -> float:
    """Seconds per detector per shot measured on the verify samples so far (``prior`` without)."""
    detectors = {t.strong_id(): t.circuit.num_detectors for t in tasks}
    work = sum(s.shots * detectors[s.strong_id] for s in stats if s.strong_id in detectors)
    spent = sum(s.seconds for s in stats if s.strong_id in detectors)
    return spent / work if work > 0 and spent > 0 else prior


def _say(console: Any, text: str) -> None:
    if console is not None:
        console.print(text, markup=False, highlight=False)


@dataclasses.dataclass(frozen=True)
class _Plan:
    points: tuple[OperatingPoint, ...]
    beyond: tuple[int, ...]
    tasks: list[sinter.Task]
    estimates: list[CpuEstimate]
    goal_estimate: CpuEstimate | None
    #: the goal distance can be built and sampled (its CPU time is decided after the others)
    goal_buildable: bool = False

    @property
    def beyond_seconds(self) -> float:
        return sum(c.seconds for c in self.estimates)


def _plan(target: Target, answers: Answers, rule: StoppingRule) -> _Plan:
    """The tasks at d_max + 2 and d_max + 4, their estimates and the goal distance's (whose tasks
    are built only when it is sampled: it may be far too large to build)."""
    from planner.config.limits import size_problem
    from planner.sampling.targeted import PRIOR_SECONDS_PER_DETECTOR
    from planner.sweep import resolved_tasks

    points = operating_points(answers)
    fitted = answers.fits.sampled_distances
    beyond = verify_distances(fitted)
    goal = goal_to_verify(fitted, answers.requirements.distance if answers.requirements else None)
    by_d = {d: resolved_tasks(_tasks(target, points, d))[0] for d in beyond}
    est = [_estimate(answers, _work(by_d[d]), distance=d, rule=rule, seconds_per_detector=PRIOR_SECONDS_PER_DETECTOR)
           for d in beyond]
    goal_est, buildable = None, False
    if goal is not None and points:
        goal_est = _estimate(answers, _goal_work(target, points, goal), distance=goal, rule=GOAL_RULE,
                             seconds_per_detector=PRIOR_SECONDS_PER_DETECTOR)
        too_big = size_problem(code=target.sweep.code, distance=goal, rounds=max(verify_rounds(goal)))
        why = (f"too large to sample: {too_big}" if too_big else
               f"{PENDING} once the distances above the fit have measured the cost per shot")
        goal_est = dataclasses.replace(goal_est, sampled=False, why=why)
        buildable = too_big is None
    return _Plan(points=points, beyond=beyond, tasks=[t for d in beyond for t in by_d[d]], estimates=est,
                 goal_estimate=goal_est, goal_buildable=goal_est is not None and buildable)


def run_verification(target: Target, answers: Answers, *, out_dir: Path, budget: str = "quick",
                     workers: int | None = None, console: Any = None,
                     max_cpu_seconds: float = DEFAULT_MAX_CPU_SECONDS) -> Verification:
    """Sample the operating points at d_max + 2, d_max + 4 and (when it fits ``max_cpu_seconds``)
    the goal distance into ``out_dir/verify`` (resumable; r = d and 3d each) and compare.

    InputError (field ``--max-cpu``) before anything is sampled when d_max + 2 and d_max + 4
    alone are estimated above ``max_cpu_seconds``."""
    from planner.sampling import run_sweep
    from planner.store import SampleStore
    from planner.sweep import budget_rule

    if not max_cpu_seconds > 0:
        raise InputError(f"{max_cpu_seconds!r} is not allowed", field="--max-cpu", allowed="seconds > 0")
    rule = budget_rule(budget)
    plan = _plan(target, answers, rule)
    goal_est = plan.goal_estimate
    if plan.beyond_seconds > max_cpu_seconds:  # refused in one line, before anything is sampled
        raise InputError(f"d={', '.join(map(str, plan.beyond))} are estimated at {plan.beyond_seconds:.3g} s "
                         f"of CPU, over {max_cpu_seconds:g} s: give --max-cpu {plan.beyond_seconds * 1.5:.0f} "
                         "or more, or a smaller --budget", field="--max-cpu")
    _say(console, f"verify: CPU estimate before sampling (--max-cpu {max_cpu_seconds:g} s):")
    for c in [*plan.estimates, *([goal_est] if goal_est else [])]:
        _say(console, "  " + cpu_text(c))
    store = SampleStore(Path(out_dir) / "verify")
    if plan.tasks:
        run_sweep(plan.tasks, store=store, rule=rule, workers=workers, console=console)
    if goal_est is not None and plan.goal_buildable:
        goal_est = _goal_decision(answers, store.stats(), plan.tasks, goal_est,
                                  max_cpu_seconds=max_cpu_seconds, beyond_seconds=plan.beyond_seconds)
    if goal_est is not None:
        _say(console, "verify: goal distance " + cpu_text(goal_est))
    if goal_est is not None and goal_est.sampled:
        goal_tasks = _tasks(target, plan.points, goal_est.distance)
        run_sweep(goal_tasks, store=store, rule=GOAL_RULE, workers=workers, console=console)
    distances = (*plan.beyond, *([goal_est.distance] if goal_est is not None else []))
    return compare(answers, plan.points, distances, store.stats(),
                   cpu=[*plan.estimates, *([goal_est] if goal_est else [])])


def _goal_decision(answers: Answers, stats: Sequence[sinter.TaskStats], beyond_tasks: Sequence[sinter.Task],
                   first: CpuEstimate, *, max_cpu_seconds: float, beyond_seconds: float) -> CpuEstimate:
    """The goal distance's estimate again, at the cost measured on d_max + 2 and d_max + 4, and
    whether it fits what ``--max-cpu`` leaves after them."""
    cost = _measured_cost(stats, beyond_tasks, first.seconds_per_detector)
    scale = cost / first.seconds_per_detector
    est = dataclasses.replace(first, seconds=first.seconds * scale, seconds_per_detector=cost)
    left = max_cpu_seconds - beyond_seconds
    fits = est.seconds <= left
    why = (f"fits the {left:.3g} s --max-cpu leaves after the distances above the fit" if fits else
           f"over the {max(left, 0):.3g} s --max-cpu leaves after the distances above the fit; give "
           f"--max-cpu {1.2 * (beyond_seconds + est.seconds):.0f} or more to sample it")
    return dataclasses.replace(est, sampled=fits, why=why)
