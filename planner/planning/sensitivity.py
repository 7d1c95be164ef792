"""Which component holds the device back: shares of the 1/Lambda budget and what-ifs.

At today's point (all scales 1): share_c = term_c / sum (term_c = w_c s_c + v_c s_c^2),
elasticity d ln Lambda / d ln p_c = -(s_c d term_c / d s_c) / (1/Lambda) (negative: a smaller
error gives a larger Lambda; the component's probability is proportional to its scale), Lambda with
the component halved and perfect, and (with a roadmap) how many months earlier the goal is met
if the component's yearly improvement were :data:`FASTER_POINTS` faster.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any

from planner.config import COMPONENTS, Target
from planner.planning.model import ResponseModel, largest_distance_within
from planner.planning.roadmap import RateSet, goal_years

FASTER_POINTS = 0.10
MONTHS_PER_YEAR = 12.0


@dataclasses.dataclass(frozen=True)
class ComponentSensitivity:
    component: str
    share: float
    elasticity: float
    suppression_halved: float
    suppression_perfect: float
    months_earlier: float | None
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        f = lambda x: None if x is None or not math.isfinite(x) else float(x)  # noqa: E731
        return {"component": self.component, "share_of_inverse_lambda": self.share,
                "elasticity": self.elasticity, "suppression_factor_halved": f(self.suppression_halved),
                "suppression_factor_perfect": f(self.suppression_perfect),
                "months_earlier": f(self.months_earlier), "note": self.note}


@dataclasses.dataclass(frozen=True)
class Sensitivity:
    suppression_today: float
    rows: tuple[ComponentSensitivity, ...]  # most limiting first
    faster_points: float
    model_form: str
    model_quality: str
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"suppression_factor_today": self.suppression_today, "faster_points": self.faster_points,
                "components": [r.to_json() for r in self.rows], "model_form": self.model_form,
                "model_quality": self.model_quality, "note": self.note}


def sensitivity(model: ResponseModel, target: Target) -> Sensitivity:
    terms = model.terms(None)
    total = sum(terms.values())
    lam = model.suppression(None)
    rm = target.roadmap
    eps = target.goal.logical_error_per_cycle
    dmax = largest_distance_within(target.goal.max_qubits) or 3
    base_t = None
    central = None
    if rm is not None:
        central = RateSet.from_rates(rm.rates)
        base_t = goal_years(model, central, eps_target=eps, max_distance=dmax, horizon_years=rm.horizon_years)
    rows = []
    for c in COMPONENTS:
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
        rows.append(ComponentSensitivity(c, share, elasticity, model.suppression({c: 0.5}),
                                         model.suppression({c: 0.0}), months, note))
    rows.sort(key=lambda r: (-r.share, -(r.months_earlier or 0.0)))
    return Sensitivity(lam, tuple(rows), FASTER_POINTS, model.form, model.quality.summary(),
                       "unsampled components share a lumped weight: " + ", ".join(model.unsampled)
                       if model.unsampled else "")
