"""Fits: logical error per cycle with intervals, the suppression factor Lambda per scale point,
and the joint-scale threshold.

Input is a list of :class:`sinter.TaskStats` whose ``json_metadata`` carries the shared key set
``{"code", "d", "basis", "rounds", "axis", "factor", "scales"}``. Every rate comes with a
likelihood-ratio interval at :data:`CONFIDENCE` (Wilks: a likelihood within a factor
:data:`LIKELIHOOD_FACTOR` of the maximum).

How things are combined (stated once, here):

- per cycle: ``sinter.fit_binomial`` on the shot error rate, then
  :func:`per_cycle_rate` (sinter's shot-to-piece conversion, rounds = pieces) on low, best and high;
- X and Z bases at one (point, distance): ``best`` is the mean of the bases' bests; each side of
  the interval is the mean plus or minus the root-sum-square of the bases' half-widths on that
  side, divided by the number of bases (independent estimates);
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

from planner.fits.rates import (
    CONFIDENCE,
    LIKELIHOOD_FACTOR,
    ZERO_ERROR_LOG_SIGMA,
    Z_SCORE,
    DistanceFit,
    Interval,
    TaskFit,
    combine_bases,
    fit_distances,
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
    "CONFIDENCE", "LIKELIHOOD_FACTOR", "ZERO_ERROR_LOG_SIGMA", "Z_SCORE", "DistanceFit", "FitReport",
    "Interval", "LambdaFit", "LineFit", "TaskFit", "Threshold", "combine_bases", "fit_distances",
    "fit_lambda", "fit_stats", "fit_tasks", "fit_threshold", "log_sigma", "per_cycle_interval",
    "per_cycle_rate", "shot_rate", "suppression_line", "weighted_line", "zero_error_upper",
]


@dataclasses.dataclass(frozen=True, kw_only=True)
class FitReport:
    """Everything fitted from one set of samples."""

    tasks: tuple[TaskFit, ...]
    distances: tuple[DistanceFit, ...]
    lambdas: tuple[LambdaFit, ...]
    threshold: Threshold
    notes: tuple[str, ...] = ()

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
        return {"confidence": CONFIDENCE,
                "tasks": [t.to_json() for t in self.tasks],
                "per_distance": [d.to_json() for d in self.distances],
                "lambda": [lf.to_json() for lf in self.lambdas],
                "threshold": self.threshold.to_json(), "notes": list(self.notes)}



def fit_stats(stats: Sequence[sinter.TaskStats]) -> FitReport:
    """All fits from one set of samples (summed per task, e.g. ``SampleStore(dir).stats()``)."""
    tasks = fit_tasks(stats)
    dists = fit_distances(tasks)
    groups: dict[tuple[str, float], list[DistanceFit]] = defaultdict(list)
    for p in dists:
        groups[(p.axis, p.factor)].append(p)
    lambdas = tuple(fit_lambda(g) for g in groups.values())
    lambdas = tuple(sorted(lambdas, key=lambda lf: (lf.axis != "joint", lf.axis, lf.factor)))
    notes = []
    if len({t.distance for t in tasks}) < 2:
        notes.append("a single distance was sampled: no Lambda can be fitted")
    nz = sum(t.zero_errors for t in tasks)
    if nz:
        notes.append(f"{nz} task(s) saw zero errors: their rate is the interval's upper end")
    return FitReport(tasks=tasks,
                     distances=tuple(sorted(dists, key=lambda p: (p.axis != "joint", p.axis, p.factor, p.distance))),
                     lambdas=lambdas, threshold=fit_threshold(lambdas), notes=tuple(notes))
