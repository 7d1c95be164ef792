"""Which component holds the device back: shares of the 1/Lambda budget and what-ifs.

At today's point (all scales 1): share_c = term_c / sum (term_c = w_c s_c + v_c s_c^2),
elasticity d ln Lambda / d ln p_c = -(s_c d term_c / d s_c) / (1/Lambda) (negative: a smaller
error gives a larger Lambda; the component's probability is proportional to its scale), Lambda with
the component halved and perfect, and (with a roadmap) how many months earlier the goal is met
if the component's yearly improvement were :data:`FASTER_POINTS` faster.

Given the bootstrap replica models, every figure also gets an interval: the same figure computed
on each replica (rates at their central values: these intervals are the fit's uncertainty only).

A component without its own sweep axis gets no figures ("not sampled", ``sampled`` False, None
values): the data fix only its group's weight, so the group's share together is given instead.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from typing import Any

from planner.config import Target
from planner.planning.leakage import present_components
from planner.fits import Interval
from planner.planning.ask import goal_distance
from planner.planning.model import ResponseModel, not_sampled_note
from planner.planning.roadmap import RateSet, goal_years
from planner.planning.uncertainty import replica_interval

FASTER_POINTS = 0.10
MONTHS_PER_YEAR = 12.0
#: the figures of a row that get an interval (attribute names of ComponentSensitivity)
FIGURES = ("share", "elasticity", "suppression_halved", "suppression_perfect", "months_earlier",
           "eps_halved", "eps_perfect")


def _ivj(iv: Interval | None) -> dict[str, Any] | None:
    return iv.to_json() if iv is not None else None


@dataclasses.dataclass(frozen=True, kw_only=True)
class ComponentSensitivity:
    component: str
    share: float | None
    elasticity: float | None
    suppression_halved: float | None
    suppression_perfect: float | None
    months_earlier: float | None
    note: str = ""
    #: False for a component without its own sweep axis (every figure None)
    sampled: bool = True
    #: bootstrap intervals of the figures above, keyed by :data:`FIGURES` (empty without replicas)
    intervals: dict[str, Interval] = dataclasses.field(default_factory=dict)
    #: logical error per cycle at the goal distance with that component halved / perfect (model)
    eps_halved: float | None = None
    eps_perfect: float | None = None

    def to_json(self) -> dict[str, Any]:
        f = lambda x: None if x is None or not math.isfinite(x) else float(x)  # noqa: E731
        iv = lambda k: _ivj(self.intervals.get(k))  # noqa: E731
        return {"component": self.component, "sampled": self.sampled, "share_of_inverse_lambda": self.share,
                "elasticity": self.elasticity, "suppression_factor_halved": f(self.suppression_halved),
                "suppression_factor_perfect": f(self.suppression_perfect),
                "months_earlier": f(self.months_earlier), "note": self.note,
                "share_interval": iv("share"), "elasticity_interval": iv("elasticity"),
                "suppression_factor_halved_interval": iv("suppression_halved"),
                "suppression_factor_perfect_interval": iv("suppression_perfect"),
                "months_earlier_interval": iv("months_earlier"),
                "logical_error_per_cycle_halved": f(self.eps_halved),
                "logical_error_per_cycle_halved_interval": iv("eps_halved"),
                "logical_error_per_cycle_perfect": f(self.eps_perfect),
                "logical_error_per_cycle_perfect_interval": iv("eps_perfect")}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Sensitivity:
    """Each component's share of 1/Lambda today and what improving it alone gives, most
    limiting first; components without their own sweep axis come last, "not sampled", and their
    group's share together is :attr:`unsampled_share`."""

    suppression_today: float
    rows: tuple[ComponentSensitivity, ...]  # most limiting first
    faster_points: float
    model_form: str
    model_quality: str
    note: str = ""
    suppression_today_interval: Interval | None = None
    #: replica models the intervals came from (0: best values only)
    num_replicas: int = 0
    #: components without their own sweep axis, and their share of 1/Lambda together
    unsampled: tuple[str, ...] = ()
    unsampled_share: float | None = None
    unsampled_share_interval: Interval | None = None
    #: the goal distance the eps figures are taken at, and eps per cycle there today (model)
    distance: int | None = None
    eps_today: float | None = None
    eps_today_interval: Interval | None = None

    def to_json(self) -> dict[str, Any]:
        return {"distance": self.distance, "logical_error_per_cycle_today": self.eps_today,
                "logical_error_per_cycle_today_interval": _ivj(self.eps_today_interval),
                "suppression_factor_today": self.suppression_today, "faster_points": self.faster_points,
                "components": [r.to_json() for r in self.rows], "model_form": self.model_form,
                "model_quality": self.model_quality, "note": self.note,
                "suppression_factor_today_interval": _ivj(self.suppression_today_interval),
                "num_replicas": self.num_replicas,
                "not_sampled": {"components": list(self.unsampled), "share_of_inverse_lambda": self.unsampled_share,
                                "share_interval": _ivj(self.unsampled_share_interval)}}


def group_share(model: ResponseModel) -> float | None:
    """The share of 1/Lambda today of the components without their own sweep axis, together
    (None when every component has its axis)."""
    terms = model.terms(None)
    total = sum(terms.values())
    if not model.unsampled or total <= 0:
        return None
    return sum(terms[c] for c in model.unsampled) / total


def _rows(model: ResponseModel, target: Target) -> dict[str, ComponentSensitivity]:
    """The figures of every component for one model (best values, no intervals)."""
    terms = model.terms(None)
    total = sum(terms.values())
    rm = target.roadmap
    eps = target.goal.logical_error_per_cycle
    dmax = goal_distance(target)
    base_t = None
    central = None
    if rm is not None:
        central = RateSet.from_rates(rm.rates, target=target)
        base_t = goal_years(model, central, eps_target=eps, max_distance=dmax, horizon_years=rm.horizon_years)
    rows = {}
    for c in present_components(model):  # leakage without its section is zero today: left out
        if not model.is_sampled(c):
            rows[c] = ComponentSensitivity(component=c, share=None, elasticity=None, suppression_halved=None,
                                           suppression_perfect=None, months_earlier=None, sampled=False,
                                           note=not_sampled_note([c]))
            continue
        share = terms[c] / total if total > 0 else 0.0
        slope = model.weights[c] + 2 * model.curvature[c]
        elasticity = -slope / total if total > 0 else 0.0
        months, note = None, ""
        if central is not None:
            t = goal_years(model, central.faster(c, FASTER_POINTS), eps_target=eps, max_distance=dmax,
                           horizon_years=rm.horizon_years)
            if base_t is not None and t is not None:
                months = (base_t - t) * MONTHS_PER_YEAR
            elif base_t is None and t is not None:
                note = "faster improvement brings the goal within the horizon"
            elif base_t is None:
                note = "goal not met within the horizon either way"
        elif rm is None:
            note = "no roadmap: months not computed"
        rows[c] = ComponentSensitivity(component=c, share=share, elasticity=elasticity,
                                       suppression_halved=model.suppression({c: 0.5}),
                                       suppression_perfect=model.suppression({c: 0.0}), months_earlier=months,
                                       note=note, eps_halved=model.logical_error_per_cycle({c: 0.5}, dmax),
                                       eps_perfect=model.logical_error_per_cycle({c: 0.0}, dmax))
    return rows


def sensitivity(model: ResponseModel, target: Target, *, models: Sequence[ResponseModel] = ()) -> Sensitivity:
    """Shares, elasticities and what-ifs at today's point, most limiting first; with replica
    ``models`` (the bootstrap) each figure carries an interval over them."""
    best = _rows(model, target)
    replicas = [_rows(m, target) for m in models]
    rows = []
    for c, row in best.items():
        ivs = {}
        for k in FIGURES:
            iv = replica_interval(getattr(row, k), [getattr(r[c], k) for r in replicas])
            if iv is not None:
                ivs[k] = iv
        rows.append(dataclasses.replace(row, intervals=ivs))
    rows.sort(key=lambda r: (not r.sampled, -(r.share or 0.0), -(r.months_earlier or 0.0)))
    lam = model.suppression(None)
    group = group_share(model)
    d = goal_distance(target)
    eps = model.logical_error_per_cycle(None, d)
    return Sensitivity(distance=d, eps_today=eps,
                       eps_today_interval=replica_interval(eps, [m.logical_error_per_cycle(None, d) for m in models]),
                       suppression_today=lam, rows=tuple(rows), faster_points=FASTER_POINTS, model_form=model.form,
                       model_quality=model.quality.summary(),
                       note=not_sampled_note(model.unsampled) if model.unsampled else "",
                       suppression_today_interval=replica_interval(lam, [m.suppression(None) for m in models]),
                       num_replicas=len(models), unsampled=tuple(model.unsampled), unsampled_share=group,
                       unsampled_share_interval=replica_interval(group, [group_share(m) for m in models])
                       if group is not None else None)
