"""Fits: logical error per cycle with intervals, the suppression factor Lambda per scale point,
and the joint-scale threshold.

Input is a list of :class:`sinter.TaskStats` whose ``json_metadata`` carries the shared key set
``{"code", "d", "basis", "rounds", "axis", "factor", "scales"}``. Every rate comes with a
likelihood-ratio interval at :data:`CONFIDENCE` (Wilks: a likelihood within a factor
:data:`LIKELIHOOD_FACTOR` of the maximum).

How things are combined (stated once, here):

- per task: ``sinter.fit_binomial`` on the shot error rate, then :func:`per_cycle_rate`
  (sinter's shot-to-piece conversion, rounds = pieces) on low, best and high;
- per (point, distance, basis) over its round counts: the fidelity decay
  ``1 - 2 P_L(r) = C (1 - 2 eps)^r`` fitted as a weighted line in r, intervals by the delta
  method (:mod:`planner.fits.decay`); one round count: the per-task rate (the single-round
  estimate, also kept beside the decay one for the smallest round count, r = d by default);
- X and Z bases at one (point, distance), as the goal says (``[goal] basis``): ``"mean"``
  (default) takes the mean of the bases' bests, each side of the interval the mean plus or minus
  the root-sum-square of the bases' half-widths on that side divided by the number of bases
  (independent estimates); ``"worse"`` takes the basis with the larger rate, with its interval;
- Lambda at one point: weighted least squares of ``ln eps_d = ln A - k ln Lambda`` with
  ``k = (d+1)/2``; the weight of a point is ``1/sigma^2`` with ``sigma`` the half-width of its
  interval in log space divided by the normal quantile; when the line has more than two points
  and chi2/dof > 1 the standard errors are inflated by sqrt(chi2/dof) (common practice);
- a point with zero observed errors enters at the upper end of its interval (flagged) with a log
  sigma of :data:`ZERO_ERROR_LOG_SIGMA`, so it pulls the line but cannot dominate it.

>>> round(LIKELIHOOD_FACTOR, 3)
6.826
"""

from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Sequence
from typing import Any

import sinter

from planner.fits.decay import (
    BASIS_COMBINATIONS,
    DecayFit,
    basis_groups,
    combine_bases,
    combine_intervals,
    combine_values,
    decay_rate,
    distance_rate,
    distance_rates,
    fit_decay,
    fit_distances,
    shot_errors,
)
from planner.fits.rates import (
    CONFIDENCE,
    LIKELIHOOD_FACTOR,
    ZERO_ERROR_LOG_SIGMA,
    Z_SCORE,
    DistanceFit,
    Interval,
    TaskFit,
    fit_tasks,
    log_sigma,
    per_cycle_interval,
    per_cycle_rate,
    shot_rate,
    zero_error_upper,
)
from planner.fits.suppression import (
    LambdaFit,
    LineFit,
    Threshold,
    fit_lambda,
    fit_threshold,
    suppression_line,
    weighted_line,
)

__all__ = [
    "BASIS_COMBINATIONS", "CONFIDENCE", "LIKELIHOOD_FACTOR", "ZERO_ERROR_LOG_SIGMA", "Z_SCORE",
    "DecayFit", "DistanceFit", "FitReport", "Interval", "LambdaFit", "LineFit", "TaskFit",
    "Threshold", "basis_groups", "combine_bases", "combine_intervals", "combine_values",
    "decay_rate", "distance_rate", "distance_rates", "fit_decay", "fit_distances", "fit_lambda",
    "fit_stats", "fit_tasks", "fit_threshold", "log_sigma", "per_cycle_interval", "per_cycle_rate",
    "shot_errors", "shot_rate", "suppression_line", "weighted_line", "zero_error_upper"
]


@dataclasses.dataclass(frozen=True, kw_only=True)
class FitReport:
    """Everything fitted from one set of samples."""

    tasks: tuple[TaskFit, ...]
    distances: tuple[DistanceFit, ...]
    lambdas: tuple[LambdaFit, ...]
    threshold: Threshold
    notes: tuple[str, ...] = ()
    #: what the per-distance rates (and so Lambda and every answer) refer to: "mean" or "worse"
    goal_basis: str = "mean"

    @property
    def sampled_distances(self) -> tuple[int, ...]:
        return tuple(sorted({t.distance for t in self.tasks}))

    def lambda_at(self, axis: str, factor: float) -> LambdaFit | None:
        for lf in self.lambdas:
            if lf.axis == axis and math.isclose(lf.factor, factor, rel_tol=1e-9):
                return lf
        return None

    def today(self) -> LambdaFit | None:
        return self.lambda_at("joint", 1.0)

    def to_json(self) -> dict[str, Any]:
        return {"confidence": CONFIDENCE, "goal_basis": self.goal_basis,
                "per_cycle_method": _method_text(self.distances),
                "tasks": [t.to_json() for t in self.tasks],
                "per_distance": [d.to_json() for d in self.distances],
                "lambda": [lf.to_json() for lf in self.lambdas],
                "threshold": self.threshold.to_json(), "notes": list(self.notes)}



def _method_text(distances: Sequence[DistanceFit]) -> str:
    methods = {d.method for d in distances}
    if methods == {"decay"}:
        return "decay"
    return "single_round" if methods <= {"single_round"} else "mixed"


def _notes(tasks: Sequence[TaskFit], dists: Sequence[DistanceFit], goal_basis: str) -> list[str]:
    notes = []
    if len({t.distance for t in tasks}) < 2:
        notes.append("a single distance was sampled: no Lambda can be fitted")
    nz = sum(t.zero_errors for t in tasks)
    if nz:
        notes.append(f"{nz} task(s) saw zero errors: their rate is the interval's upper end")
    single = [p for p in dists if p.method != "decay" and len(p.rounds) > 1]
    if single:
        notes.append(f"{len(single)} (point, distance) rate(s) fall back to a single round count "
                     "(zero errors, a rate near 1/2 or no decay seen): see per_basis notes")
    if len({t.basis for t in tasks}) > 1:
        notes.append("per-distance rates and Lambda refer to "
                     + ("the worse of the X and Z bases" if goal_basis == "worse" else "the mean of the X and Z bases"))
    return notes


def fit_stats(stats: Sequence[sinter.TaskStats], *, goal_basis: str = "mean") -> FitReport:
    """All fits from one set of samples (summed per task, e.g. ``SampleStore(dir).stats()``);
    ``goal_basis``: how the X and Z rates combine per distance, ``"mean"`` or ``"worse"``."""
    tasks = fit_tasks(stats)
    dists = fit_distances(tasks, combine=goal_basis)
    groups: dict[tuple[str, float], list[DistanceFit]] = defaultdict(list)
    for p in dists:
        groups[(p.axis, p.factor)].append(p)
    lambdas = tuple(fit_lambda(g) for g in groups.values())
    lambdas = tuple(sorted(lambdas, key=lambda lf: (lf.axis != "joint", lf.axis, lf.factor)))
    notes = _notes(tasks, dists, goal_basis)
    return FitReport(goal_basis=goal_basis, tasks=tasks,
                     distances=tuple(sorted(dists, key=lambda p: (p.axis != "joint", p.axis, p.factor, p.distance))),
                     lambdas=lambdas, threshold=fit_threshold(lambdas), notes=tuple(notes))
