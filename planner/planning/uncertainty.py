"""Parametric bootstrap: carry the sampling uncertainty through fit -> model -> inversion.

Each replica draws, per task, a rate ``p ~ Beta(errors + 1/2, shots - errors + 1/2)`` (Jeffreys
posterior) and ``hits ~ Binomial(shots, p)``, refits the per-cycle rates, Lambda per point (the
original log-space weights kept, common practice for a bootstrap of a weighted fit) and the
response model in the same form, and re-solves the answers. Interval ends are the
:data:`~planner.fits.CONFIDENCE` percentiles of the replicas; the best value stays the original
answer.
"""

from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Sequence
from typing import Any

import numpy as np
import sinter

from planner.config import COMPONENTS
from planner.fits import CONFIDENCE, FitReport, Interval, fit_tasks, weighted_line, zero_error_upper
from planner.planning.ask import Requirements, _solve_lever, smallest_distance
from planner.planning.model import ModelData, ResponseModel, fit_response

DEFAULT_REPLICAS = 200


@dataclasses.dataclass(frozen=True)
class Uncertainty:
    """Bootstrap intervals (keys: ``joint_factor``, ``factor.<component>``, ``lambda_today``,
    ``today_distance``) and the replica models (for the roadmap's date ranges)."""

    replicas: int
    intervals: dict[str, Interval]
    reachable_fraction: dict[str, float]
    models: tuple[ResponseModel, ...]

    def to_json(self) -> dict[str, Any]:
        return {"replicas": self.replicas, "confidence": CONFIDENCE,
                "intervals": {k: v.to_json() for k, v in self.intervals.items()},
                "reachable_fraction": dict(self.reachable_fraction)}


def replica_models(stats: Sequence[sinter.TaskStats], report: FitReport, model: ResponseModel, *,
                   replicas: int = DEFAULT_REPLICAS, seed: int = 0) -> list[ResponseModel]:
    """Response models refitted on ``replicas`` parametric resamples of the counts."""
    rng = np.random.default_rng(seed)
    tasks = fit_tasks(stats)
    shots = np.array([t.shots for t in tasks])
    errors = np.array([t.errors for t in tasks])
    rounds = np.array([t.rounds for t in tasks], float)
    group_of: dict[tuple[str, float, int], list[int]] = defaultdict(list)
    for i, t in enumerate(tasks):
        group_of[(t.axis, t.factor, t.distance)].append(i)
    sig = {(p.axis, p.factor, p.distance): p.log_sigma for p in report.distances}
    points = [lf for lf in report.lambdas if lf.suppression is not None]
    base = ModelData.from_fits(report)
    upper0 = np.array([zero_error_upper(int(n)) for n in shots])
    out = []
    for _ in range(replicas):
        p = rng.beta(errors + 0.5, shots - errors + 0.5)
        hits = rng.binomial(shots, p)
        rate = np.where(hits > 0, hits / shots, upper0)
        with np.errstate(invalid="ignore"):
            cyc = np.where(rate < 0.5, (1 - np.abs(1 - 2 * rate) ** (1 / rounds)) / 2, 0.5)
        inv, lna = [], []
        for lf in points:
            ks, ys, ss = [], [], []
            for d in lf.distances:
                idx = group_of[(lf.axis, lf.factor, d)]
                ks.append((d + 1) / 2)
                ys.append(math.log(max(float(cyc[idx].mean()), 1e-300)))
                ss.append(sig[(lf.axis, lf.factor, d)])
            line = weighted_line(ks, ys, ss)
            inv.append(math.exp(line.slope))
            lna.append(line.intercept)
        data = dataclasses.replace(base, inv_lambda=np.array(inv), ln_a=np.array(lna))
        out.append(fit_response(data, form=model.form, held_out=False))
    return out


def _interval(best: float | None, values: Sequence[float]) -> Interval | None:
    if best is None or not values:
        return None
    q = (1 - CONFIDENCE) / 2
    lo, hi = np.quantile(np.array(values, float), [q, 1 - q])
    return Interval(float(best), float(min(lo, best)), float(max(hi, best)))


def bootstrap(stats: Sequence[sinter.TaskStats], report: FitReport, model: ResponseModel,
              answer: Requirements, *, replicas: int = DEFAULT_REPLICAS, seed: int = 0) -> Uncertainty:
    """Intervals on the requirement answers (factors, today's Lambda and distance)."""
    models = replica_models(stats, report, model, replicas=replicas, seed=seed)
    d, eps = answer.distance, answer.eps_target
    vals: dict[str, list[float]] = defaultdict(list)
    reached: dict[str, int] = defaultdict(int)
    for m in models:
        for lever in ("joint", *COMPONENTS):
            a = _solve_lever(m, lever, distance=d, eps_target=eps)
            key = "joint_factor" if lever == "joint" else f"factor.{lever}"
            if a.reachable:
                vals[key].append(a.factor)
                reached[key] += 1
        vals["lambda_today"].append(m.suppression(None))
        td = smallest_distance(m, None, eps)
        if td is not None:
            vals["today_distance"].append(td)
            reached["today_distance"] += 1
    best = {"joint_factor": answer.joint.factor, "lambda_today": answer.today.suppression_model,
            "today_distance": answer.today.distance}
    best.update({f"factor.{a.lever}": a.factor for a in answer.components})
    intervals = {}
    for k, b in best.items():
        iv = _interval(b, vals.get(k, []))
        if iv is not None:
            intervals[k] = iv
    frac = {k: reached.get(k, 0) / replicas for k in best if k != "lambda_today"}
    return Uncertainty(replicas, intervals, frac, tuple(models))


def with_intervals(answer: Requirements, unc: Uncertainty) -> Requirements:
    """The answer with the bootstrap intervals attached to its factors and today's distance."""
    iv = unc.intervals
    joint = dataclasses.replace(answer.joint, factor_interval=iv.get("joint_factor"))
    comps = tuple(dataclasses.replace(a, factor_interval=iv.get(f"factor.{a.lever}")) for a in answer.components)
    today = dataclasses.replace(answer.today, distance_interval=iv.get("today_distance"))
    return dataclasses.replace(answer, joint=joint, components=comps, today=today)

