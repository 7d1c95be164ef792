"""Removal efficiency as a lever: sample the logical error per cycle at several removal
efficiencies (the measure-qubit reset's, the data-qubit step's, or both together) over the
target's distances, fit Lambda and the prefactor per efficiency (planner.fits), extrapolate each
to the goal's distance along eps_d = A Lambda^-(d+1)/2 and find the efficiency that meets the goal
(planner.planning.leakage.efficiency_for_goal). Its interval comes from the ends of the Lambda
intervals (the prefactor's spread is not included: said so in the answer).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from typing import Any

import sinter

from planner.config import Target
from planner.errors import InputError
from planner.fits import Interval, fit_stats
from planner.planning.ask import goal_distance
from planner.planning.leakage import efficiency_for_goal
from planner.sampling.leakage import leakage_samplers
from planner.sweep import tasks_for_scales

#: which removal efficiencies a lever sets
LEVERS: dict[str, tuple[str, ...]] = {"reset": ("reset_removal",), "data": ("data_removal",),
                                      "both": ("reset_removal", "data_removal")}
EFFICIENCIES: tuple[float, ...] = (0.0, 0.5, 0.9, 1.0)


@dataclasses.dataclass(frozen=True)
class LeverPoint:
    efficiency: float
    suppression: Interval
    eps_at_goal: Interval  # extrapolated to the goal distance

    def to_json(self) -> dict[str, Any]:
        return {"efficiency": self.efficiency, "suppression_factor": self.suppression.to_json(),
                "logical_error_per_cycle_at_goal_distance": self.eps_at_goal.to_json()}


@dataclasses.dataclass(frozen=True)
class RemovalLever:
    """The efficiency of ``lever`` meeting ``goal`` at ``distance`` (None: not reachable by
    removal alone), with an interval, and the sampled points it was read from."""

    lever: str
    goal: float
    distance: int
    efficiency: Interval | None
    points: tuple[LeverPoint, ...]
    note: str

    def to_json(self) -> dict[str, Any]:
        return {"lever": self.lever, "fields": list(LEVERS[self.lever]), "goal": self.goal,
                "distance": self.distance, "efficiency": self.efficiency.to_json() if self.efficiency else None,
                "points": [p.to_json() for p in self.points], "note": self.note}


def _tasks(target: Target, lever: str, efficiencies: Sequence[float]) -> list[sinter.Task]:
    leak = target.device.leakage
    if leak is None:
        raise InputError(f"{target.source}: device.leakage: missing section: removal needs leakage")
    tasks = []
    for e in efficiencies:
        device = target.device.model_copy(update={"leakage": leak.model_copy(
            update={k: float(e) for k in LEVERS[lever]})})
        t = target.model_copy(update={"device": device})
        tasks += tasks_for_scales(t, {}, distances=target.sweep.distances, label=f"removal_{lever}", factor=e)
    return tasks


def removal_lever(target: Target, *, lever: str = "both", efficiencies: Sequence[float] = EFFICIENCIES,
                  max_errors: int = 200, max_shots: int = 200_000, workers: int = 1) -> RemovalLever:
    """Sample and answer (see the module doc) for the target's goal and goal distance."""
    if lever not in LEVERS:
        raise InputError(f"{lever!r} is not a removal lever", field="lever", allowed=", ".join(LEVERS))
    if len(target.sweep.distances) < 2:
        raise InputError(f"{target.source}: sweep.distances: a removal lever needs two distances (for Lambda)")
    stats = sinter.collect(num_workers=workers, tasks=_tasks(target, lever, efficiencies), max_errors=max_errors,
                           max_shots=max_shots, custom_decoders=leakage_samplers())
    report = fit_stats(stats)
    d, goal = goal_distance(target), target.goal.logical_error_per_cycle
    points = []
    for lf in report.lambdas:
        if lf.suppression is None:
            continue
        k = (d + 1) / 2
        at = lambda lam: math.exp(lf.ln_prefactor.best - k * math.log(lam))  # noqa: E731
        points.append(LeverPoint(efficiency=lf.factor, suppression=lf.suppression,
                                 eps_at_goal=Interval(best=at(lf.suppression.best), low=at(lf.suppression.high),
                                                      high=at(lf.suppression.low))))
    points.sort(key=lambda p: p.efficiency)
    ln_goal = math.log(goal)
    read = lambda f: efficiency_for_goal([(p.efficiency, math.log(f(p))) for p in points], ln_goal)  # noqa: E731
    best = read(lambda p: p.eps_at_goal.best)
    low, high = read(lambda p: p.eps_at_goal.low), read(lambda p: p.eps_at_goal.high)
    eff = Interval(best=best, low=low if low is not None else best,
                   high=high if high is not None else 1.0) if best is not None else None
    note = (f"extrapolated from d = {', '.join(map(str, target.sweep.distances))} to d = {d}; interval from "
            "the Lambda intervals only (not the prefactor's)")
    if best is None:
        note = f"not reachable by removal alone at d = {d}: " + note
    elif high is None:
        note += "; the pessimistic end is not reached even at efficiency 1"
    return RemovalLever(lever=lever, goal=goal, distance=d, efficiency=eff, points=tuple(points), note=note)
