"""Model error: the part of every answer's interval that sampling more would not shrink.

Two parts, each a half-width per answer (in log space for positive quantities, linear for cost
shares), added in quadrature to each side of the bootstrap interval:

- **windows**: Lambda and A at every scale point are refitted over other runs of consecutive
  distances (the lowest and the highest adjacent pair, and the lowest three when more than three
  were sampled; :attr:`planner.fits.LambdaFit.windows`), the response model refitted on each
  (same form) and every answer re-solved: the half-width is the largest departure from the best
  answer. It holds how far the (d+1)/2 law's Lambda depends on which distances say it, and so a
  drift of Lambda with d. (It also holds some sampling noise of the smaller windows: it errs wide.)
- **misfit**: where the response model misses its own points (chi2/dof or the held-out mean
  square, :attr:`planner.planning.model.FitQuality.inflation`, above 1), the bootstrap's
  half-width times ``sqrt(inflation - 1)``: inflating the fit's covariance by that factor widens
  the sampling interval by ``sqrt(inflation)`` (to first order), and this is the added part.

Combined side = ``sqrt(sampling side^2 + windows^2 + misfit^2)``. The model part dominates an
answer when ``sqrt(windows^2 + misfit^2)`` exceeds the mean sampling half-width.

An answer is **marginal** (no verdict either way) when its reachability flips with the noise or
the model form: reached on between :data:`MARGINAL_LOW` and :data:`MARGINAL_HIGH` of the
replicas, reached on some window model and not on another, or, not reachable alone, the Lambda
it gives when perfect lies within its (combined) interval of the Lambda needed.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from typing import Any

from planner.fits import FitReport, Interval, LambdaFit
from planner.planning.ask import FactorAnswer, Requirements
from planner.planning.model import ModelData, ResponseModel, fit_response
from planner.planning.uncertainty import Uncertainty, best_values, draw_answers

__all__ = ["MARGINAL_HIGH", "MARGINAL_LOW", "ModelError", "combine_parts", "flag_answers", "model_error",
           "window_report", "with_model_error"]

#: reached on a share of replicas between these: marginal (common practice, no source)
MARGINAL_LOW, MARGINAL_HIGH = 0.1, 0.9
#: which window each alternative takes at every point: (size, lowest or highest centre)
WINDOW_CHOICES = {"lowest pair": (2, "low"), "highest pair": (2, "high"), "lowest three": (3, "low")}


@dataclasses.dataclass(frozen=True, kw_only=True)
class ModelError:
    """The model-form alternatives and the misfit of the response model."""

    window_models: dict[str, ResponseModel]
    inflation: float
    misfit: bool
    misfit_reasons: tuple[str, ...]
    drifting_points: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return {"window_alternatives": sorted(self.window_models), "variance_inflation": self.inflation,
                "misfit": self.misfit, "misfit_reasons": list(self.misfit_reasons),
                "lambda_drifts_at": list(self.drifting_points),
                "combination": "each side: sqrt(sampling^2 + windows^2 + misfit^2), log space "
                               "(linear for cost shares)"}


def _window(lf: LambdaFit, size: int, end: str) -> LambdaFit:
    ws = [w for w in lf.windows if len(w.distances) == size]
    if not ws:
        return lf
    w = min(ws, key=lambda x: x.centre) if end == "low" else max(ws, key=lambda x: x.centre)
    return dataclasses.replace(lf, suppression=w.suppression, ln_prefactor=w.ln_prefactor, distances=w.distances)


def window_report(report: FitReport, choice: str) -> FitReport | None:
    """``report`` with every point's Lambda and A from the window ``choice`` (a key of
    :data:`WINDOW_CHOICES`); None when that changes no point."""
    size, end = WINDOW_CHOICES[choice]
    lambdas = tuple(_window(lf, size, end) if lf.suppression is not None else lf for lf in report.lambdas)
    if all(a.distances == b.distances for a, b in zip(lambdas, report.lambdas)):
        return None
    return dataclasses.replace(report, lambdas=lambdas)


def model_error(report: FitReport, model: ResponseModel) -> ModelError:
    """The window alternatives (response model refitted per choice) and the model's misfit."""
    alts = {}
    for choice in WINDOW_CHOICES:
        alt = window_report(report, choice)
        if alt is not None:
            alts[choice] = fit_response(ModelData.from_fits(alt), form=model.form, held_out=False)
    drift = tuple(f"{lf.axis}@{lf.factor:g}" for lf in report.lambdas if lf.drift is not None and lf.drift.significant)
    q = model.quality
    return ModelError(window_models=alts, inflation=q.inflation, misfit=q.misfit,
                      misfit_reasons=q.misfit_reasons, drifting_points=drift)


# ---------------------------------------------------------------------------------------------
# combining


def _transform(key: str, best: float, values: Sequence[float]) -> tuple[Any, Any]:
    """log/exp for a positive quantity, identity for cost shares or anything reaching 0."""
    if key.startswith("mix.share.") or best <= 0 or any(v <= 0 for v in values):
        return (lambda x: x), (lambda x: x)
    return math.log, math.exp


def combine_parts(key: str, best: float, sampling: Interval | None, alternatives: Sequence[float],
                  inflation: float) -> tuple[Interval, Interval, str]:
    """The combined interval, the model part alone and which part dominates, for one answer.

    >>> c, m, dom = combine_parts("joint_factor", 0.5, Interval(low=0.45, best=0.5, high=0.55), [0.4], 1.0)
    >>> round(m.low, 3), dom, round(c.low, 3) < 0.4
    (0.4, 'model', True)
    >>> c, m, dom = combine_parts("joint_factor", 0.5, Interval(low=0.45, best=0.5, high=0.55), [], 1.0)
    >>> c == Interval(low=0.45, best=0.5, high=0.55), dom
    (True, 'sampling')
    """
    ends = [sampling.low, sampling.high] if sampling is not None else []
    fwd, back = _transform(key, best, [*alternatives, *ends])
    b = fwd(best)
    s_lo = b - fwd(sampling.low) if sampling is not None else 0.0
    s_hi = fwd(sampling.high) - b if sampling is not None else 0.0
    windows = max((abs(fwd(v) - b) for v in alternatives), default=0.0)
    misfit = math.sqrt(max(inflation - 1.0, 0.0)) * (s_lo + s_hi) / 2
    h = math.hypot(windows, misfit)
    lo, hi = b - math.hypot(s_lo, h), b + math.hypot(s_hi, h)
    dominant = "model" if h > (s_lo + s_hi) / 2 else "sampling"
    return (_clamp(key, Interval(low=back(lo), best=best, high=back(hi))),
            _clamp(key, Interval(low=back(b - h), best=best, high=back(b + h))), dominant)


def _clamp(key: str, iv: Interval) -> Interval:
    low, high = iv.low, iv.high
    if key.startswith("mix.share."):
        low, high = max(low, 0.0), min(high, 1.0)
    elif key.startswith(("factor.", "mix.factor.")) or key == "joint_factor":
        low = max(low, 0.0)
    if key.startswith("mix.factor."):  # the mix only ever improves a component
        high = min(high, 1.0)
    if key == "today_distance":  # odd distances, outward
        low = max(3.0, 2 * math.floor((low - 1) / 2) + 1)
        high = 2 * math.ceil((high - 1) / 2) + 1
    return Interval(low=min(low, iv.best), best=iv.best, high=max(high, iv.best))


def with_model_error(unc: Uncertainty, me: ModelError, answer: Requirements,
                     costs: Mapping[str, float]) -> Uncertainty:
    """``unc`` with every interval combined with the model-form part; the bootstrap's alone in
    ``sampling_intervals``, the model part in ``model_intervals``."""
    draws = draw_answers(list(me.window_models.values()), answer, costs)
    combined, model_part, dominant = {}, {}, {}
    for key, best in best_values(answer).items():
        if best is None or not math.isfinite(best):
            continue
        alts = [v for v in draws.values.get(key, []) if v is not None and math.isfinite(v)]
        sampling = unc.intervals.get(key)
        if sampling is None and not alts:
            continue
        combined[key], model_part[key], dominant[key] = combine_parts(key, best, sampling, alts, me.inflation)
    # answers that exist on fewer window models than the best one: the reached share says so
    frac = dict(unc.reachable_fraction)
    n = max(len(me.window_models), 1)
    for key in list(frac):
        frac[f"windows.{key}"] = (draws.reached.get(key, 0) if key != "mix" else draws.reached.get("mix", 0)) / n
    return dataclasses.replace(unc, intervals=combined, sampling_intervals=dict(unc.intervals),
                               model_intervals=model_part, dominant=dominant, model_error=me,
                               reachable_fraction=frac if me.window_models else dict(unc.reachable_fraction))


# ---------------------------------------------------------------------------------------------
# flags


def _windows_disagree(a: FactorAnswer, key: str, unc: Uncertainty) -> bool:
    """Some window model reaches the goal where the best does not, or the other way round."""
    wf = unc.reachable_fraction.get(f"windows.{key}")
    if wf is None or unc.model_error is None or not unc.model_error.window_models:
        return False
    if a.reachable and a.factor is None:
        return False  # unbounded headroom: the window models count no factor either
    return wf < 1 if a.reachable else wf > 0


def _marginal(a: FactorAnswer, key: str, unc: Uncertainty | None, required: Interval | None,
              best_required: float | None) -> bool:
    if not a.sampled or unc is None:
        return False
    frac = unc.reachable_fraction.get(key)
    if (frac is not None and MARGINAL_LOW <= frac <= MARGINAL_HIGH) or _windows_disagree(a, key, unc):
        return True
    if not a.reachable and a.lever != "joint" and best_required is not None:
        lam = unc.intervals.get(f"lambda.{a.lever}")
        return lam is not None and lam.high >= (required.low if required else best_required)
    return False


def flag_answers(answer: Requirements, unc: Uncertainty | None, model: ResponseModel) -> Requirements:
    """Every answer flagged: ``model_misfit`` (the response model exceeds its limits), ``marginal``
    (the verdict flips with noise or the model form) and which interval part dominates."""
    misfit = model.quality.misfit
    dom = unc.dominant if unc is not None else {}
    req_iv = unc.intervals.get("required_lambda") if unc is not None else None

    def flag(a: FactorAnswer) -> FactorAnswer:
        key = "joint_factor" if a.lever == "joint" else f"factor.{a.lever}"
        lam_key = f"lambda.{a.lever}"
        return dataclasses.replace(
            a, model_misfit=misfit and a.sampled,
            marginal=_marginal(a, key, unc, req_iv, answer.required_suppression),
            interval_source=dom.get(key) or dom.get(lam_key, ""))

    frac = unc.reachable_fraction.get("mix") if unc is not None else None
    mix = dataclasses.replace(answer.mix, model_misfit=misfit,
                              marginal=frac is not None and MARGINAL_LOW <= frac <= MARGINAL_HIGH,
                              interval_source=dom.get("mix.cost", ""))
    today = dataclasses.replace(answer.today, model_misfit=misfit, interval_source=dom.get("lambda_today", ""))
    notes = list(answer.notes)
    if misfit:
        notes.append("the response model misfits its points (" + "; ".join(model.quality.misfit_reasons)
                     + "): every answer built on it is unreliable; its intervals include the misfit")
    me = unc.model_error if unc is not None else None
    if me is not None and me.drifting_points:
        notes.append(f"Lambda drifts with distance at {len(me.drifting_points)} point(s) "
                     f"({', '.join(me.drifting_points[:4])}{'...' if len(me.drifting_points) > 4 else ''}): "
                     "the spread between distance windows is in the intervals")
    return dataclasses.replace(answer, joint=flag(answer.joint), components=tuple(flag(a) for a in answer.components),
                               mix=mix, today=today, notes=tuple(notes), model_misfit=misfit,
                               interval_parts=_parts(unc))


def _parts(unc: Uncertainty | None) -> dict[str, dict[str, Any]]:
    if unc is None:
        return {}
    return {k: {**iv.to_json(), "sampling_interval": _j(unc.sampling_intervals.get(k)),
                "model_interval": _j(unc.model_intervals.get(k)), "dominant": unc.dominant.get(k, "sampling")}
            for k, iv in unc.intervals.items()}


def _j(iv: Interval | None) -> dict[str, Any] | None:
    return iv.to_json() if iv is not None else None
