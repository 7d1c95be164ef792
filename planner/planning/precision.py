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
It is kept as ``fit_relative_half_width`` and reported in a note.)

The delta method: per task, Var(ln P) = (1 - P) / (n P) for the shot error rate P from n shots;
the decay fit over the round counts of each basis and the bases' combination (the same functions
as the fits, :func:`planner.fits.distance_rate`, differentiated by central differences) carry it
to ``y = ln eps`` at each (point, distance), so round counts are tasks like distances are;
the Jacobian of each answer with respect to every ``y`` is taken by central differences through
the same weighted line fits and the same response-model fit (weights held at today's values,
which makes the projection conservative). So ``V_a = sum_t S[a, t] / n_t`` with ``S`` returned
here, the input of :func:`planner.precision_alloc.allocate`.
"""

from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import sinter

from planner.config import COMPONENTS, Target
from planner.errors import InputError
from planner.fits import Z_SCORE, FitReport, LambdaFit, distance_rate, fit_stats, shot_errors, suppression_line
from planner.planning.ask import choose_distance, solve_lever
from planner.planning.model import ModelData, ResponseModel, fit_response

__all__ = ["DEFAULT_FOCUS", "KINDS", "WEIGHT_SHARE", "AnswerPrecision", "Assessment", "assess",
           "check_focus", "describe"]

KINDS = ("lambda", "lambda_today", "weights", "joint_factor")
DEFAULT_FOCUS = ("lambda", "weights", "joint_factor")
#: a weight is tracked when its share of 1/Lambda today is at least this
WEIGHT_SHARE = 0.05
#: step in ln eps for the central differences (rates move by 0.01%)
FD_STEP = 1e-4


@dataclasses.dataclass(frozen=True, kw_only=True)
class AnswerPrecision:
    """One tracked answer: its value now and the relative half-width of its interval."""

    name: str
    kind: str
    value: float
    relative_half_width: float
    target: float
    #: Lambda only: the relative half-width of the fit's own interval (widened when chi2/dof > 1)
    fit_relative_half_width: float | None = None

    @property
    def relative_width(self) -> float:
        """Older name of :attr:`relative_half_width` (it always was the half width)."""
        return self.relative_half_width

    @property
    def fit_relative_width(self) -> float | None:
        """Older name of :attr:`fit_relative_half_width`."""
        return self.fit_relative_half_width

    @property
    def met(self) -> bool:
        return self.relative_half_width <= self.target

    def to_json(self) -> dict[str, Any]:
        rel = self.relative_half_width if math.isfinite(self.relative_half_width) else None
        return {"name": self.name, "kind": self.kind, "value": self.value,
                "relative_half_width": rel, "fit_relative_half_width": self.fit_relative_half_width,
                "target": self.target, "met": self.met}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Assessment:
    """The answers now, and ``sensitivity[a, t]`` (per answer, per task in ``task_ids`` order)
    such that Var(answer a) ~ sum_t sensitivity[a, t] / shots_t (at the current shots that is
    ``(relative_half_width * value / Z)^2``)."""

    answers: tuple[AnswerPrecision, ...]
    task_ids: tuple[str, ...]
    sensitivity: np.ndarray
    report: FitReport | None
    model: ResponseModel | None
    notes: tuple[str, ...] = ()

    @property
    def met(self) -> bool:
        return all(a.met for a in self.answers)

    @property
    def worst(self) -> AnswerPrecision | None:
        return max(self.answers, key=lambda a: a.relative_half_width / a.target, default=None)

    def target_variance(self) -> np.ndarray:
        return np.array([(a.target * abs(a.value) / Z_SCORE) ** 2 for a in self.answers])


def check_focus(focus: Sequence[str]) -> tuple[str, ...]:
    """The answer kinds to track, duplicates dropped (InputError for an unknown kind).

    >>> check_focus(["lambda", "weights", "lambda"])
    ('lambda', 'weights')
    """
    bad = [k for k in focus if k not in KINDS]
    if bad or not focus:
        raise InputError(f"{tuple(focus)!r} is not a non-empty subset of the answer kinds", field="focus",
                         allowed=", ".join(KINDS))
    return tuple(dict.fromkeys(focus))


def _ln_rate_variance(stat: sinter.TaskStats) -> float:
    """c with Var(ln P) ~ c / shots for one task's shot error rate P (binomial:
    Var(ln P) = (1 - P) / (n P)), per shot run (discarded shots cost too)."""
    kept = stat.shots - stat.discards
    p = max(stat.errors, 1) / kept  # zero errors: the rate is below ~1/n; use that as the scale
    p = min(p, 0.49)
    return (1 - p) / p * (stat.shots / max(kept, 1))


def _row_gradient(stats: Sequence[sinter.TaskStats], members: Sequence[int], combine: str) -> np.ndarray:
    """d ln eps_row / d ln P_t for the row's tasks, by central differences through the same
    decay fit and basis combination as the fits (:func:`planner.fits.distance_rate`)."""
    kept = np.array([stats[t].shots - stats[t].discards for t in members], float)
    errors = np.array([stats[t].errors for t in members], float)
    rounds = np.array([int(stats[t].json_metadata["rounds"]) for t in members], float)
    basis = [str(stats[t].json_metadata.get("basis", "z")) for t in members]
    by_basis = [np.array([i for i, b in enumerate(basis) if b == name]) for name in sorted(set(basis))]
    ln_p0 = np.log(shot_errors(shots=kept, errors=errors))

    def y(ln_p: np.ndarray) -> float:
        p = np.exp(ln_p)
        parts = [dict(rounds=rounds[ix], shot_error=p[ix], shots=kept[ix], zero_errors=errors[ix] == 0)
                 for ix in by_basis]
        return math.log(max(distance_rate(parts, combine), 1e-300))

    grad = np.zeros(len(members))
    for i in range(len(members)):
        up, down = ln_p0.copy(), ln_p0.copy()
        up[i] += FD_STEP
        down[i] -= FD_STEP
        grad[i] = (y(up) - y(down)) / (2 * FD_STEP)
    return grad


def _joint_factor(model: ResponseModel, *, distance: int, eps_target: float) -> float | None:
    """The joint factor meeting ``eps_target`` at ``distance`` (None: not reachable, or met with
    unbounded headroom); the same search as ``planner ask``."""
    answer = solve_lever(model, "joint", distance=distance, eps_target=eps_target)
    return answer.factor if answer.reachable else None


@dataclasses.dataclass(frozen=True, kw_only=True)
class _Rows:
    """The fits' grouping: tasks -> (point, distance) rows ``keys`` -> one line per Lambda point.

    ``y0``/``sig``: ln eps and its log sigma per row; ``coef[t]``: Var(y of the task's row)
    contribution ``coef[t] / n_t``; ``row_of_task[t]``: the row (-1: not in any line)."""

    lambdas: list[LambdaFit]
    keys: list[tuple[str, float, int]]
    slices: list[slice]
    y0: np.ndarray
    sig: np.ndarray
    coef: np.ndarray
    row_of_task: np.ndarray


def _rows(stats: Sequence[sinter.TaskStats], report: FitReport) -> _Rows:
    group_tasks: dict[tuple[str, float, int], list[int]] = defaultdict(list)
    for t, s in enumerate(stats):
        m = s.json_metadata
        group_tasks[(str(m["axis"]), float(m["factor"]), int(m["d"]))].append(t)
    dist_fits = {(p.axis, p.factor, p.distance): p for p in report.distances}
    lambdas = [lf for lf in report.lambdas if lf.suppression is not None]
    keys = [(lf.axis, lf.factor, d) for lf in lambdas for d in lf.distances]
    coef = np.zeros(len(stats))
    row_of_task = np.full(len(stats), -1)
    for j, k in enumerate(keys):  # the decay over round counts, the bases combined, per row
        members = group_tasks[k]
        grad = _row_gradient(stats, members, report.goal_basis)
        for t, gt in zip(members, grad):
            coef[t] = gt * gt * _ln_rate_variance(stats[t])
            row_of_task[t] = j
    starts = np.cumsum([0] + [len(lf.distances) for lf in lambdas])
    return _Rows(lambdas=lambdas, keys=keys, slices=[slice(a, b) for a, b in zip(starts, starts[1:])],
                 y0=np.array([math.log(dist_fits[k].per_cycle.best) for k in keys]),
                 sig=np.array([dist_fits[k].log_sigma for k in keys]), coef=coef, row_of_task=row_of_task)


@dataclasses.dataclass(frozen=True, kw_only=True)
class _Tracked:
    """What is tracked: ``names`` (name, kind) in answer order."""

    names: list[tuple[str, str]]
    lambda_rows: list[int]
    weight_groups: list[tuple[str, tuple[str, ...]]]
    joint: bool
    distance: int
    eps_goal: float


def _weight_groups(model: ResponseModel) -> list[tuple[str, tuple[str, ...]]]:
    """Weights whose share of 1/Lambda today is at least :data:`WEIGHT_SHARE` (lumped: one)."""
    total = sum(model.terms(None).values())
    lumped = tuple(c for c in COMPONENTS if c in model.unsampled)
    groups = [(c,) for c in COMPONENTS if c not in lumped] + ([lumped] if lumped else [])
    return [("+".join(g), g) for g in groups
            if total > 0 and sum(model.weights[c] for c in g) / total >= WEIGHT_SHARE]


def _tracked(focus: Sequence[str], rows: _Rows, model0: ResponseModel, target: Target,
             notes: list[str]) -> _Tracked:
    names: list[tuple[str, str]] = []
    lambda_rows: list[int] = []
    for i, lf in enumerate(rows.lambdas):
        today = lf.axis == "joint" and math.isclose(lf.factor, 1.0)
        if "lambda" in focus or ("lambda_today" in focus and today):
            names.append((f"lambda {lf.axis}@{lf.factor:g}", "lambda"))
            lambda_rows.append(i)
    groups = _weight_groups(model0) if "weights" in focus else []
    names += [(f"weight {name}", "weights") for name, _ in groups]
    distance, _ = choose_distance(target)
    eps_goal = target.goal.logical_error_per_cycle
    joint = "joint_factor" in focus and _joint_factor(model0, distance=distance, eps_target=eps_goal) is not None
    if "joint_factor" in focus and not joint:
        notes.append(f"joint factor at d={distance}: no root in (0, 1024] (not reachable or met "
                     "with more than 1024x headroom): not tracked")
    if joint:
        names.append((f"joint factor d={distance}", "joint_factor"))
    return _Tracked(names=names, lambda_rows=lambda_rows, weight_groups=groups, joint=joint,
                    distance=distance, eps_goal=eps_goal)


def _answers_function(rows: _Rows, tracked: _Tracked, base: ModelData,
                      form: str) -> Callable[[np.ndarray], np.ndarray]:
    """The tracked answers as a function of the rows' ln eps (the same fits as the answers)."""
    def answers_of(y: np.ndarray) -> np.ndarray:
        lines = [suppression_line([k[2] for k in rows.keys[sl]], y[sl], rows.sig[sl]) for sl in rows.slices]
        out = [math.exp(-lines[i].slope) for i in tracked.lambda_rows]
        if tracked.weight_groups or tracked.joint:
            data = dataclasses.replace(base, inv_lambda=np.exp([line.slope for line in lines]),
                                       ln_a=np.array([line.intercept for line in lines]))
            model = fit_response(data, form=form, held_out=False)
            out += [sum(model.weights[c] for c in g) for _, g in tracked.weight_groups]
            if tracked.joint:
                f = _joint_factor(model, distance=tracked.distance, eps_target=tracked.eps_goal)
                out.append(math.nan if f is None else f)
        return np.array(out, float)

    return answers_of


def _sensitivity(answers_of: Callable[[np.ndarray], np.ndarray], rows: _Rows, num_answers: int) -> np.ndarray:
    """``S[a, t] = J[a, row(t)]^2 * coef[t]`` (Var_a = sum_t S[a, t] / n_t), J by central differences."""
    jac = np.zeros((num_answers, len(rows.keys)))
    for j in range(len(rows.keys)):
        up, down = rows.y0.copy(), rows.y0.copy()
        up[j] += FD_STEP
        down[j] -= FD_STEP
        jac[:, j] = (answers_of(up) - answers_of(down)) / (2 * FD_STEP)
    jac = np.nan_to_num(jac)
    sens = np.zeros((num_answers, len(rows.row_of_task)))
    for t, row in enumerate(rows.row_of_task):
        if row >= 0:
            sens[:, t] = jac[:, row] ** 2 * rows.coef[t]
    return sens


def _precision_of(name: str, kind: str, value: float, variance: float, precision: float,
                  by_name: Mapping[str, LambdaFit], notes: list[str]) -> AnswerPrecision:
    rel = Z_SCORE * math.sqrt(variance) / abs(value) if value else math.inf
    fit_rel = None
    if kind == "lambda":
        lf = by_name[name]
        fit_rel = lf.suppression.relative_half_width
        if fit_rel > max(rel, precision) * 1.05 and (lf.chi2_per_dof or 0) > 1:
            notes.append(f"{name}: the fit widens its interval to +-{100 * fit_rel:.1f}% for "
                         f"scatter beyond the intervals (chi2/dof {lf.chi2_per_dof:.2f}); more "
                         "shots do not narrow that part")
    return AnswerPrecision(name=name, kind=kind, value=float(value), relative_half_width=float(rel),
                           target=precision, fit_relative_half_width=fit_rel)


def assess(stats: Sequence[sinter.TaskStats], target: Target, *, precision: float,
           focus: Sequence[str] = DEFAULT_FOCUS) -> Assessment:
    """Fit what ``stats`` hold and say how precise each tracked answer is, with sensitivities."""
    if not 0 < precision < 1:
        raise InputError(f"{precision!r} is not allowed: a relative half-width", field="precision",
                         allowed="0 < precision < 1")
    focus = check_focus(focus)
    stats = [s for s in stats if s.shots - s.discards > 0]
    ids = tuple(s.strong_id for s in stats)
    report = fit_stats(stats, goal_basis=target.goal.basis)
    rows = _rows(stats, report)
    notes = [f"{lf.axis}@{lf.factor:g}: {lf.note}" for lf in report.lambdas if lf.suppression is None]
    if not rows.lambdas:
        return Assessment(answers=(), task_ids=ids, sensitivity=np.zeros((0, len(stats))), report=report,
                          model=None, notes=tuple(notes) or ("no scale point has a Lambda yet",))
    base = ModelData.from_fits(report)
    model0 = fit_response(base, held_out=False)
    tracked = _tracked(focus, rows, model0, target, notes)
    answers_of = _answers_function(rows, tracked, base, model0.form)
    values = answers_of(rows.y0)
    sens = _sensitivity(answers_of, rows, len(tracked.names))
    n = np.array([max(s.shots, 1) for s in stats], float)
    variances = (sens / n).sum(axis=1)
    by_name = {f"lambda {lf.axis}@{lf.factor:g}": lf for lf in rows.lambdas}
    answers = tuple(_precision_of(name, kind, value, var, precision, by_name, notes)
                    for (name, kind), value, var in zip(tracked.names, values, variances))
    return Assessment(answers=answers, task_ids=ids, sensitivity=sens, report=report, model=model0,
                      notes=tuple(notes))


def describe(answer: AnswerPrecision) -> str:
    """One-line text of an answer's precision.

    >>> describe(AnswerPrecision(name="lambda joint@1", kind="lambda", value=2.0, relative_half_width=0.1234,
    ...                          target=0.1))
    'lambda joint@1 = 2 +- 12.3% (target 10%)'
    """
    return (f"{answer.name} = {answer.value:.4g} +- {100 * answer.relative_half_width:.1f}% "
            f"(target {100 * answer.target:g}%)")
