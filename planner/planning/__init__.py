"""Planning: turning fits into requirements, roadmaps and sensitivities (pure: never samples,
never prints, never touches files; reading an out directory is :mod:`planner.jobs.review`).

One computation for everyone: :func:`answer_all` gives the fits, the response model, the
requirements for the goal (with bootstrap intervals), the roadmap and the sensitivity.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import sinter

from planner.config import COMPONENTS, Target
from planner.errors import InputError
from planner.fits import CONFIDENCE, FitReport, fit_stats
from planner.planning.ask import (
    FactorAnswer,
    MixAnswer,
    Requirements,
    TodayAnswer,
    cheapest_mix,
    distance_extrapolation_note,
    requirements,
    smallest_distance,
)
from planner.planning.calculator import CalculatorAnswer, calculate
from planner.planning.model import (
    FitQuality,
    ResponseModel,
    fit_model,
    largest_distance_within,
    physical_qubits,
)
from planner.planning.physical import physical_answers
from planner.planning.roadmap import Roadmap, build_roadmap
from planner.planning.sensitivity import Sensitivity, sensitivity
from planner.planning.modelerror import ModelError, flag_answers, model_error, with_model_error
from planner.planning.uncertainty import Uncertainty, bootstrap, with_intervals

__all__ = [
    "Answers", "CalculatorAnswer", "FactorAnswer", "FitQuality", "MixAnswer", "ModelError", "Requirements",
    "ResponseModel", "Roadmap", "Sensitivity", "TodayAnswer", "Uncertainty", "answer_all",
    "build_roadmap", "calculate", "cheapest_mix", "fit_model", "largest_distance_within",
    "model_error", "no_model_reason", "physical_qubits", "requirements", "sensitivity", "smallest_distance",
]


@dataclasses.dataclass(frozen=True, kw_only=True)
class Answers:
    """Everything planned from one out directory. ``model`` and the answers built on it are None
    when no scale point has a Lambda (``notes`` says why)."""

    fits: FitReport
    model: ResponseModel | None
    requirements: Requirements | None
    roadmap: Roadmap | None
    sensitivity: Sensitivity | None
    uncertainty: Uncertainty | None
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        j = lambda x: x.to_json() if x is not None else None  # noqa: E731
        return {"confidence": CONFIDENCE, "fits": self.fits.to_json(), "model": j(self.model),
                "requirements": j(self.requirements), "roadmap": j(self.roadmap),
                "sensitivity": j(self.sensitivity), "uncertainty": j(self.uncertainty),
                "notes": list(self.notes)}


def no_model_reason(report: FitReport) -> str:
    if len(report.sampled_distances) < 2:
        return (f"only distance {report.sampled_distances[0]} sampled: no Lambda, so no model and no "
                "requirements (sample at least two distances)")
    return "no scale point has a Lambda: no model and no requirements"


def answer_all(target: Target, stats: Sequence[sinter.TaskStats], *, seed: int = 0, replicas: int = 200,
               eps_target: float | None = None, distance: int | None = None,
               qubits: int | None = None) -> Answers:
    """Fits, model, requirements, roadmap and sensitivity; with ``replicas > 0`` every figure
    derived from the model carries a bootstrap interval (``replicas=0``: best values only)."""
    report = fit_stats(stats, goal_basis=target.goal.basis)
    if not report.tasks:
        raise InputError("no samples with shots to fit")
    if not any(lf.suppression is not None for lf in report.lambdas):
        return Answers(fits=report, model=None, requirements=None, roadmap=None, sensitivity=None,
                       uncertainty=None, notes=(no_model_reason(report),))
    model = fit_model(report)
    req = requirements(model, target, eps_target=eps_target, distance=distance, qubits=qubits, report=report)
    costs = {c: target.cost(c) for c in COMPONENTS}
    unc = bootstrap(stats, report, model, req, replicas=replicas, seed=seed, costs=costs) if replicas > 0 else None
    if unc is not None:  # the model-form part (windows, misfit) joins the bootstrap's
        unc = with_model_error(unc, model_error(report, model), req, costs)
        req = with_intervals(req, unc)
    req = flag_answers(req, unc, model)
    models = unc.models if unc else ()
    rm = build_roadmap(target, model, seed=seed, models=models, eps_target=eps_target)
    if rm is not None and (far := distance_extrapolation_note(rm.goal_distance, report.sampled_distances)):
        rm = dataclasses.replace(rm, note="; ".join(n for n in (rm.note, far) if n))
    req = dataclasses.replace(req, physical=physical_answers(target, req, rm))
    sens = sensitivity(model, target, models=models)
    if unc is not None and "lambda_today" in unc.intervals:  # the same Lambda today as the requirements
        sens = dataclasses.replace(sens, suppression_today_interval=unc.intervals["lambda_today"])
    return Answers(fits=report, model=model, requirements=req, roadmap=rm, sensitivity=sens, uncertainty=unc)
