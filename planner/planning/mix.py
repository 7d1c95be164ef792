"""The cheapest mix: the set of factors that meets the goal at the least cost-weighted number of
halvings of error (constrained minimisation on the response model)."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Callable, Mapping
from typing import Any

import numpy as np
from scipy.optimize import brentq, minimize

from planner.config import COMPONENTS
from planner.fits import Interval
from planner.planning.limits import MAX_HALVINGS, _below, _fin, _ivj
from planner.planning.model import ResponseModel, not_sampled_note

@dataclasses.dataclass(frozen=True, kw_only=True)
class MixAnswer:
    """The cheapest set of factors: minimises sum_c cost_c * log2(1/s_c) subject to the goal.

    ``cost_shares``: each component's part of :attr:`cost` (fractions summing to 1; empty when
    the cost is 0). The ``*_interval(s)`` fields are bootstrap intervals (the mix re-solved on
    each replica model), None until :func:`planner.planning.uncertainty.with_intervals` runs.
    """

    reachable: bool
    scales: dict[str, float]
    cost: float | None
    suppression: float
    logical_error_per_cycle: float | None
    note: str = ""
    extrapolation: tuple[str, ...] = ()
    cost_shares: dict[str, float] = dataclasses.field(default_factory=dict)
    scale_intervals: dict[str, Interval] = dataclasses.field(default_factory=dict)
    cost_share_intervals: dict[str, Interval] = dataclasses.field(default_factory=dict)
    cost_interval: Interval | None = None
    suppression_interval: Interval | None = None
    #: components without their own sweep axis: the mix never changes them (kept at today's error)
    not_sampled: tuple[str, ...] = ()
    #: the response model exceeds its misfit limits (the answer is unreliable)
    model_misfit: bool = False
    #: reached on only part of the replicas (see planning.modelerror)
    marginal: bool = False
    interval_source: str = ""

    def changed(self) -> list[str]:
        """Components the mix improves (factor below 1), in COMPONENTS order."""
        return [c for c in COMPONENTS if self.scales.get(c, 1.0) < 1.0]

    def to_json(self) -> dict[str, Any]:
        return {"reachable": self.reachable, "scales": dict(self.scales), "cost_halvings": self.cost,
                "suppression_factor": _fin(self.suppression),
                "logical_error_per_cycle": _fin(self.logical_error_per_cycle), "note": self.note,
                "extrapolation": list(self.extrapolation),
                "halvings": {c: -math.log2(s) if s > 0 else None for c, s in self.scales.items()},
                "cost_shares": dict(self.cost_shares),
                "scale_intervals": {c: v.to_json() for c, v in self.scale_intervals.items()},
                "cost_share_intervals": {c: v.to_json() for c, v in self.cost_share_intervals.items()},
                "cost_halvings_interval": _ivj(self.cost_interval),
                "suppression_factor_interval": _ivj(self.suppression_interval),
                "not_sampled": list(self.not_sampled), "model_misfit": self.model_misfit,
                "marginal": self.marginal, "reliable": not (self.model_misfit or self.marginal),
                "interval_source": self.interval_source or None}


def mix_cost(scales: Mapping[str, float], costs: Mapping[str, float]) -> float:
    """sum_c cost_c * log2(1/s_c): the number of cost-weighted halvings of error.

    >>> mix_cost({"gate_2q": 0.25, "readout": 0.5}, {"gate_2q": 1.0, "readout": 3.0})
    5.0
    """
    return float(sum(costs.get(c, 1.0) * -math.log2(s) for c, s in scales.items() if s < 1))


def cost_shares(scales: Mapping[str, float], costs: Mapping[str, float]) -> dict[str, float]:
    """Each improved component's fraction of :func:`mix_cost` (empty when nothing improves).

    >>> cost_shares({"gate_2q": 0.25, "readout": 0.5, "reset": 1.0}, {"gate_2q": 1.0, "readout": 3.0})
    {'gate_2q': 0.4, 'readout': 0.6}
    """
    total = mix_cost(scales, costs)
    if total <= 0:
        return {}
    return {c: costs.get(c, 1.0) * -math.log2(s) / total for c, s in scales.items() if s < 1}


def _levers(model: ResponseModel) -> list[str]:
    """Components whose factor moves Lambda in the model (never one without its own sweep axis:
    its weight is only known together with the others of its group)."""
    return [c for c in COMPONENTS if (model.weights[c] > 0 or model.curvature[c] > 0) and model.is_sampled(c)]


def _minimise(cost: np.ndarray, slack: Callable[[np.ndarray], float],
              x0s: list[np.ndarray]) -> np.ndarray | None:
    """The cheapest halvings ``u`` (0 <= u <= :data:`MAX_HALVINGS`) with ``slack(u) >= 0`` over
    the starting points (SLSQP from each), None if none meets the constraint."""
    best: np.ndarray | None = None
    for x0 in x0s:
        r = minimize(lambda u: float(cost @ u), x0, jac=lambda u: cost, method="SLSQP",
                     bounds=[(0.0, MAX_HALVINGS)] * len(cost),
                     constraints=[{"type": "ineq", "fun": slack}], options={"maxiter": 200, "ftol": 1e-12})
        u = np.clip(r.x, 0.0, MAX_HALVINGS)
        if slack(u) >= -1e-9 and (best is None or cost @ u < cost @ best):
            best = u
    if best is not None and slack(best) > 1e-12 and slack(best * 0) < 0:
        # land exactly on the goal: pull the mix back along the line to today until it binds
        t = brentq(lambda a: slack(best * a), 0.0, 1.0, xtol=1e-14)
        best = best * t
    return best


def cheapest_mix(model: ResponseModel, *, distance: int, eps_target: float, costs: Mapping[str, float],
                 starts: tuple[dict[str, float], ...] = (), default_starts: bool = True) -> MixAnswer:
    """Minimise sum_c cost_c log2(1/s_c) over s_c in (0, 1] with eps_distance(s) <= eps_target.

    ``starts`` seed the optimiser; ``default_starts=False`` uses only them (the bootstrap re-solves
    each replica from the original answer, which is close, to stay fast). Components without
    their own sweep axis stay at 1 (the mix names them in ``not_sampled`` and its note)."""
    ln_t = math.log(eps_target)
    kept = tuple(model.unsampled)
    answer = _mix_answer(model, distance=distance, ln_t=ln_t, costs=costs, starts=starts,
                         default_starts=default_starts)
    if not kept:
        return answer
    note = "; ".join(n for n in (answer.note, not_sampled_note(kept) + " (kept at today's error)") if n)
    return dataclasses.replace(answer, not_sampled=kept, note=note)


def _mix_answer(model: ResponseModel, *, distance: int, ln_t: float, costs: Mapping[str, float],
                starts: tuple[dict[str, float], ...], default_starts: bool) -> MixAnswer:
    today = {c: 1.0 for c in COMPONENTS}
    if model.ln_eps(today, distance) <= ln_t:
        return MixAnswer(reachable=True, scales=today, cost=0.0, suppression=model.suppression(today),
                         logical_error_per_cycle=_below(model.logical_error_per_cycle(today, distance)),
                         note="goal already met today")
    levers = _levers(model)
    if not levers:
        return MixAnswer(reachable=False, scales=today, cost=None, suppression=model.suppression(today),
                         logical_error_per_cycle=math.nan, note="model has no levers")

    def scales_of(u: np.ndarray) -> dict[str, float]:
        return {**today, **{c: float(2.0 ** -ui) for c, ui in zip(levers, u)}}

    x0s = [np.array([-math.log2(max(st.get(c, 1.0), 2 ** -MAX_HALVINGS)) for c in levers]) for st in starts]
    if default_starts or not x0s:
        x0s += [np.full(len(levers), 1.0), np.full(len(levers), 4.0)]
    best = _minimise(np.array([costs.get(c, 1.0) for c in levers]),
                     lambda u: ln_t - model.ln_eps(scales_of(u), distance), x0s)
    if best is None:
        return MixAnswer(reachable=False, scales=today, cost=None, suppression=model.suppression(today),
                         logical_error_per_cycle=math.nan,
                         note="not reachable: no mix of factors meets the goal at this distance")
    s = {c: (1.0 if v > 1 - 1e-12 else v) for c, v in scales_of(best).items()}
    return MixAnswer(reachable=True, scales=s, cost=mix_cost(s, costs), suppression=model.suppression(s),
                     logical_error_per_cycle=model.logical_error_per_cycle(s, distance),
                     extrapolation=tuple(model.extrapolation(s)), cost_shares=cost_shares(s, costs))
