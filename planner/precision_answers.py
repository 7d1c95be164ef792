"""How precise the answers are now, and how each task's shots would change that (delta method).

The answers tracked (``focus`` picks the kinds):

- ``lambda``: the suppression factor at every scale point (``lambda_today``: only at joint 1.0);
- ``weights``: the response-model weights whose share of 1/Lambda today is at least
  :data:`WEIGHT_SHARE` (a lumped group of components counts as one weight);
- ``joint_factor``: the joint factor that reaches the goal at the goal distance (the headline
  of ``planner ask``).

Precision is the relative half-width of the :data:`~planner.fits.CONFIDENCE` interval,
``Z * sd / |value|`` with ``sd`` from the delta method below: the statistical width, the part that
more shots narrow. (The Lambda fit widens its interval by sqrt(chi2/dof) when a line scatters
beyond its points' intervals; with three distances that factor is a one-degree-of-freedom chi2,
random under a correct model and constant under a wrong one, so more shots cannot target it.
It is kept as ``fit_relative_width`` and reported in a note.)

The delta method: per task, Var(ln P) = (1 - P) / (n P) for the shot error rate P from n shots;
the per-cycle rate and the mean over bases carry it to ``y = ln eps`` at each (point, distance);
the Jacobian of each answer with respect to every ``y`` is taken by central differences through
the same weighted line fits and the same response-model fit (weights held at today's values,
which makes the projection conservative). So ``V_a = sum_t S[a, t] / n_t`` with ``S`` returned
here, the input of :func:`planner.sampling.allocate.allocate`.
"""

from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import sinter
from scipy.optimize import brentq

from planner.config import COMPONENTS, Target
from planner.fits import Z_SCORE, FitReport, fit_stats, weighted_line
from planner.planning.ask import choose_distance
from planner.planning.model import ModelData, ResponseModel, fit_response

KINDS = ("lambda", "lambda_today", "weights", "joint_factor")
DEFAULT_FOCUS = ("lambda", "weights", "joint_factor")
#: a weight is tracked when its share of 1/Lambda today is at least this
WEIGHT_SHARE = 0.05
#: step in ln eps for the central differences (rates move by 0.01%)
FD_STEP = 1e-4


@dataclasses.dataclass(frozen=True)
class AnswerPrecision:
    """One tracked answer: its value now and the relative half-width of its interval."""

    name: str
    kind: str
    value: float
    relative_width: float
    target: float
    #: Lambda only: the half-width of the fit's own interval (widened when chi2/dof > 1)
    fit_relative_width: float | None = None

    @property
    def met(self) -> bool:
        return self.relative_width <= self.target

    def to_json(self) -> dict[str, Any]:
        rel = self.relative_width if math.isfinite(self.relative_width) else None
        return {"name": self.name, "kind": self.kind, "value": self.value,
                "relative_half_width": rel, "fit_relative_half_width": self.fit_relative_width,
                "target": self.target, "met": self.met}


@dataclasses.dataclass(frozen=True)
class Assessment:
    """The answers now, and ``sensitivity[a, t]`` (per answer, per task in ``task_ids`` order)
    such that Var(answer a) ~ sum_t sensitivity[a, t] / shots_t (at the current shots that is
    ``(relative_width * value / Z)^2``)."""

    answers: tuple[AnswerPrecision, ...]
    task_ids: tuple[str, ...]
    sensitivity: np.ndarray
    report: FitReport
    model: ResponseModel | None
    notes: tuple[str, ...] = ()

    @property
    def met(self) -> bool:
        return all(a.met for a in self.answers)

    @property
    def worst(self) -> AnswerPrecision | None:
        return max(self.answers, key=lambda a: a.relative_width / a.target, default=None)

    def target_variance(self) -> np.ndarray:
        return np.array([(a.target * abs(a.value) / Z_SCORE) ** 2 for a in self.answers])


def check_focus(focus: Sequence[str]) -> tuple[str, ...]:
    bad = [k for k in focus if k not in KINDS]
    if bad or not focus:
        raise ValueError(f"focus must be a non-empty subset of {KINDS}, got {tuple(focus)!r}")
    return tuple(dict.fromkeys(focus))


def _ln_rate_cost(stat: sinter.TaskStats) -> tuple[float, float]:
    """(eps per cycle, c) with Var(ln eps) ~ c / shots for one task.

    Var(ln P) = (1 - P) / (n P) (binomial); d ln eps / d ln P = P (1 - 2P)^(1/r - 1) / (r eps).
    """
    m = stat.json_metadata
    r = int(m["rounds"])
    kept = stat.shots - stat.discards
    p = max(stat.errors, 1) / kept  # zero errors: the rate is below ~1/n; use that as the scale
    p = min(p, 0.49)
    eps = sinter.shot_error_rate_to_piece_error_rate(p, pieces=r)
    g = p * (1 - 2 * p) ** (1 / r - 1) / (r * eps)
    return eps, g * g * (1 - p) / p * (stat.shots / max(kept, 1))


def _solve_joint(model: ResponseModel, *, distance: int, eps_target: float) -> float | None:
    """Joint factor f with eps_distance(f * every component) = eps_target (None without a root)."""
    ln_t = math.log(eps_target)

    def h(f: float) -> float:
        return model.ln_eps({c: f for c in COMPONENTS}, distance) - ln_t

    lo, hi = (1e-9, 1.0) if h(1.0) > 0 else (1.0, 1.0)
    if lo == hi:  # met today: headroom, up to 1024x worse
        while hi < 1024 and h(hi * 2) <= 0:
            hi *= 2
        if hi >= 1024:
            return None
        lo, hi = hi, hi * 2
    if not (h(lo) <= 0 <= h(hi) or h(lo) >= 0 >= h(hi)):
        return None
    return float(brentq(h, lo, hi, xtol=1e-15, rtol=1e-13))


def assess(stats: Sequence[sinter.TaskStats], target: Target, *, precision: float,
           focus: Sequence[str] = DEFAULT_FOCUS) -> Assessment:
    """Fit what ``stats`` hold and say how precise each tracked answer is, with sensitivities."""
    if not 0 < precision < 1:
        raise ValueError("precision is a relative half-width, 0 < precision < 1")
    focus = check_focus(focus)
    stats = [s for s in stats if s.shots - s.discards > 0]
    ids = tuple(s.strong_id for s in stats)
    report = fit_stats(stats)
    # the fits' own grouping: tasks -> (point, distance) -> point
    group_tasks: dict[tuple[str, float, int], list[int]] = defaultdict(list)
    for t, s in enumerate(stats):
        m = s.json_metadata
        group_tasks[(str(m["axis"]), float(m["factor"]), int(m["d"]))].append(t)
    dist_fits = {(p.axis, p.factor, p.distance): p for p in report.distances}
    lambdas = [lf for lf in report.lambdas if lf.suppression is not None]
    notes = [lf_note for lf_note in (f"{lf.axis}@{lf.factor:g}: {lf.note}" for lf in report.lambdas
                                     if lf.suppression is None)]
    keys = [(lf.axis, lf.factor, d) for lf in lambdas for d in lf.distances]
    y0 = np.array([math.log(dist_fits[k].per_cycle.best) for k in keys])
    sig = np.array([dist_fits[k].log_sigma for k in keys])
    # Var(y_k) = sum over the group's tasks of coef[t] / n_t (eps-weighted mean over bases)
    coef = np.zeros(len(stats))
    key_of_task = np.full(len(stats), -1)
    for j, k in enumerate(keys):
        members = group_tasks[k]
        parts = [_ln_rate_cost(stats[t]) for t in members]
        total = sum(e for e, _ in parts)
        for t, (e, c) in zip(members, parts):
            coef[t] = (e / total) ** 2 * c
            key_of_task[t] = j
    if not lambdas:
        return Assessment((), ids, np.zeros((0, len(stats))), report, None,
                          tuple(notes) or ("no scale point has a Lambda yet",))

    slices = []
    start = 0
    for lf in lambdas:
        slices.append(slice(start, start + len(lf.distances)))
        start += len(lf.distances)
    kvals = np.array([(k[2] + 1) / 2 for k in keys])
    base = ModelData.from_fits(report)
    model0 = fit_response(base, held_out=False)
    distance, _ = choose_distance(target)
    eps_goal = target.goal.logical_error_per_cycle

    names: list[tuple[str, str]] = []
    lambda_rows: list[int] = []
    for i, lf in enumerate(lambdas):
        today = lf.axis == "joint" and math.isclose(lf.factor, 1.0)
        if "lambda" in focus or ("lambda_today" in focus and today):
            names.append((f"lambda {lf.axis}@{lf.factor:g}", "lambda"))
            lambda_rows.append(i)
    weight_groups: list[tuple[str, tuple[str, ...]]] = []
    if "weights" in focus:
        terms = model0.terms(None)
        total = sum(terms.values())
        lumped = tuple(c for c in COMPONENTS if c in model0.unsampled)
        groups = [(c,) for c in COMPONENTS if c not in lumped] + ([lumped] if lumped else [])
        for g in groups:
            if total > 0 and sum(model0.weights[c] for c in g) / total >= WEIGHT_SHARE:
                weight_groups.append(("+".join(g), g))
                names.append((f"weight {'+'.join(g)}", "weights"))
    want_joint = "joint_factor" in focus and _solve_joint(model0, distance=distance, eps_target=eps_goal) is not None
    if "joint_factor" in focus and not want_joint:
        notes.append(f"joint factor at d={distance}: no root in (0, 1024] (not reachable or met "
                     "with more than 1024x headroom): not tracked")
    if want_joint:
        names.append((f"joint factor d={distance}", "joint_factor"))

    def answers_of(y: np.ndarray) -> np.ndarray:
        ln_lam, ln_a = [], []
        for lf, sl in zip(lambdas, slices):
            line = weighted_line(kvals[sl], y[sl], sig[sl])
            ln_lam.append(-line.slope)
            ln_a.append(line.intercept)
        out = [math.exp(ln_lam[i]) for i in lambda_rows]
        if weight_groups or want_joint:
            data = dataclasses.replace(base, inv_lambda=np.exp(-np.array(ln_lam)), ln_a=np.array(ln_a))
            model = fit_response(data, form=model0.form, held_out=False)
            out += [sum(model.weights[c] for c in g) for _, g in weight_groups]
            if want_joint:
                f = _solve_joint(model, distance=distance, eps_target=eps_goal)
                out.append(math.nan if f is None else f)
        return np.array(out, float)

    values = answers_of(y0)
    jac = np.zeros((len(names), len(keys)))
    for j in range(len(keys)):
        up, down = y0.copy(), y0.copy()
        up[j] += FD_STEP
        down[j] -= FD_STEP
        jac[:, j] = (answers_of(up) - answers_of(down)) / (2 * FD_STEP)
    jac = np.nan_to_num(jac)
    # S[a, t] = J[a, key(t)]^2 * coef[t]: Var_a = sum_t S[a, t] / n_t
    sens = np.zeros((len(names), len(stats)))
    for t in range(len(stats)):
        if key_of_task[t] >= 0:
            sens[:, t] = jac[:, key_of_task[t]] ** 2 * coef[t]
    n = np.array([max(s.shots, 1) for s in stats], float)
    delta_var = (sens / n).sum(axis=1)
    answers = []
    by_name = {f"lambda {lf.axis}@{lf.factor:g}": lf for lf in lambdas}
    for a, ((name, kind), value) in enumerate(zip(names, values)):
        rel = Z_SCORE * math.sqrt(delta_var[a]) / abs(value) if value else math.inf
        fit_rel = None
        if kind == "lambda":
            lf = by_name[name]
            fit_rel = (lf.suppression.high - lf.suppression.low) / (2 * lf.suppression.best)
            if fit_rel > max(rel, precision) * 1.05 and (lf.chi2_per_dof or 0) > 1:
                notes.append(f"{name}: the fit widens its interval to +-{100 * fit_rel:.1f}% for "
                             f"scatter beyond the intervals (chi2/dof {lf.chi2_per_dof:.2f}); more "
                             "shots do not narrow that part")
        answers.append(AnswerPrecision(name=name, kind=kind, value=float(value),
                                       relative_width=float(rel), target=precision,
                                       fit_relative_width=fit_rel))
    return Assessment(tuple(answers), ids, sens, report, model0, tuple(notes))


def describe(answer: AnswerPrecision) -> str:
    """One-line text of an answer's precision.

    >>> describe(AnswerPrecision("lambda joint@1", "lambda", 2.0, 0.1234, 0.1))
    'lambda joint@1 = 2 +- 12.3% (target 10%)'
    """
    return (f"{answer.name} = {answer.value:.4g} +- {100 * answer.relative_width:.1f}% "
            f"(target {100 * answer.target:g}%)")


def task_label(meta: Mapping[str, Any]) -> str:
    """Short text naming a task: the scale axis times its factor, the distance, the basis (the
    same form in ``planner status`` and in the precision messages).

    >>> task_label({"axis": "joint", "factor": 1.0, "d": 5, "basis": "x"})
    'joint ×1 d=5 x'
    >>> task_label({"axis": "gate_1q", "factor": 0.3, "d": 7, "basis": "z"})
    'gate_1q ×0.3 d=7 z'
    """
    factor = meta.get("factor", "?")
    if isinstance(factor, int | float) and not isinstance(factor, bool):
        factor = f"{float(factor) + 0.0:g}"
    return f"{meta.get('axis', '?')} ×{factor} d={meta.get('d', '?')} {meta.get('basis', '?')}"
