"""The response model: how Lambda and the prefactor A depend on each component's scale factor.

Error-budget form (``linear``): ``1/Lambda = sum_c w_c s_c`` with ``w_c >= 0`` (weighted NNLS):
every component adds its share of "distance to threshold", a perfect device has no logical error.
When the linear form misfits (chi2/dof above :data:`CHI2_LIMIT` or a held-out point missed by
more than :data:`LOO_LIMIT` sigma), richer forms are tried and the one predicting the held-out
points best (leave-one-out, over the points every form can hold out) is kept: ``quadratic`` adds
a non-negative curvature term per component, ``1/Lambda = sum_c (w_c s_c + v_c s_c^2)``;
``interaction`` adds to the linear form one shared pairwise term ``u sum_{c<c'} (s_c - 1)(s_c' - 1)``
(of either sign: zero on every single-component axis, it lets the joint axis depart from the sum
of the axes). A chosen form that still exceeds the limits is a misfit (:attr:`FitQuality.misfit`):
every answer built on it carries the flag. The prefactor is ``ln A = a_0 + sum_c a_c s_c`` (weighted
least squares). Then ``eps_d(s) = A(s) * Lambda(s)^(-(d+1)/2)`` (Google Quantum AI, Nature 638,
920 (2025), eq. 1); a surface code needs ``2 d^2 - 1`` physical qubits (same paper), a repetition
code ``2 d - 1`` (see :func:`physical_qubits`).

Components without their own sweep axis only ever move together with the joint factor; their
weight is fitted as one lumped column (``unsampled`` names them). The model splits it evenly only
so that it can be evaluated; no answer about one of them alone is given (planning says "not
sampled" and :func:`not_sampled_note` says how to sample it).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from typing import Any

import numpy as np

from planner.config import COMPONENTS
from planner.errors import InputError
from planner.fits import Z_SCORE, FitReport, LambdaFit
from planner.planning.heldout import held_out_residuals as _loo
from planner.planning.heldout import mean_square as _mean_square
from planner.planning.heldout import solve as _solve
from planner.planning.codes import CODES, largest_distance_within, physical_qubits, qubit_rule

__all__ = ["CHI2_LIMIT", "CODES", "FORMS", "LOO_LIMIT", "NOT_SAMPLED", "FitQuality", "ModelData", "ResponseModel",
           "fit_model", "fit_response", "largest_distance_within", "not_sampled_note", "pair_term",
           "physical_qubits", "qubit_rule"]

FORMS = ("linear", "quadratic", "interaction")
#: what every answer about a component without its own sweep axis says instead of a figure
NOT_SAMPLED = "not sampled"


def not_sampled_note(components: "tuple[str, ...] | list[str]") -> str:
    """How to sample components that have no sweep axis of their own.

    >>> not_sampled_note(["idle"])
    'not sampled: idle has no sweep axis of its own; add it to sweep.components and run `planner sweep TARGET`'
    """
    names = ", ".join(components)
    one = len(components) == 1
    return (f"{NOT_SAMPLED}: {names} {'has' if one else 'have'} no sweep axis of {'its' if one else 'their'} own; "
            f"add {'it' if one else 'them'} to sweep.components and run `planner sweep TARGET`")
#: leave-one-out |residual|/sigma beyond which a form misfits (common practice, no source: ~3 sigma)
LOO_LIMIT = 3.0
#: chi2 per degree of freedom beyond which a form misfits (common practice, no source: with ~10
#: degrees of freedom, chi2/dof > 3 has a chance below 1e-3 when the model is right)
CHI2_LIMIT = 3.0
#: a richer form is kept only when its held-out mean square is below this share of the simpler
#: one's (common practice, no source: guards against fitting noise)
RICHER_GAIN = 0.8


@dataclasses.dataclass(frozen=True)
class ModelData:
    """Fit input as arrays: one row per scale point with a fitted Lambda."""

    scales: np.ndarray  # shape (n, 6), columns in COMPONENTS order
    inv_lambda: np.ndarray  # 1/Lambda best, shape (n,)
    inv_sigma: np.ndarray  # sigma of 1/Lambda
    ln_a: np.ndarray
    ln_a_sigma: np.ndarray
    labels: tuple[str, ...]

    @classmethod
    def from_fits(cls, report: FitReport) -> ModelData:
        rows = [lf for lf in report.lambdas if lf.suppression is not None]
        if not rows:
            raise InputError("no scale point has a Lambda: sample at least two distances", field="samples")
        return cls(
            # a task without [device.leakage] carries no leakage scale: there, that component is 0
            scales=np.array([[lf.scales.get(c, float(c != "leakage")) for c in COMPONENTS] for lf in rows], float),
            inv_lambda=np.array([1 / lf.suppression.best for lf in rows]),
            inv_sigma=np.array([_inv_sigma(lf) for lf in rows]),
            ln_a=np.array([lf.ln_prefactor.best for lf in rows]),
            ln_a_sigma=np.array([max((lf.ln_prefactor.high - lf.ln_prefactor.low) / (2 * Z_SCORE), 1e-6)
                                 for lf in rows]),
            labels=tuple(f"{lf.axis}@{lf.factor:g}" for lf in rows))


def _inv_sigma(lf: LambdaFit) -> float:
    iv = lf.suppression
    return max((1 / iv.low - 1 / iv.high) / (2 * Z_SCORE), 1e-9)


@dataclasses.dataclass(frozen=True)
class FitQuality:
    """How well the model reproduces the fitted points (residuals in units of their sigma)."""

    chi2_per_dof: float | None
    max_abs_residual: float
    loo_max_abs_residual: float | None
    loo_chi2_per_point: float | None
    num_points: int
    worst_point: str

    @property
    def misfit_reasons(self) -> tuple[str, ...]:
        """Which limit the fit exceeds (empty: within both)."""
        out = []
        if self.chi2_per_dof is not None and self.chi2_per_dof > CHI2_LIMIT:
            out.append(f"chi2/dof {self.chi2_per_dof:.3g} > {CHI2_LIMIT:g}")
        if self.loo_max_abs_residual is not None and self.loo_max_abs_residual > LOO_LIMIT:
            out.append(f"held-out residual {self.loo_max_abs_residual:.3g} sigma > {LOO_LIMIT:g}")
        return tuple(out)

    @property
    def misfit(self) -> bool:
        """The model misses its own points beyond the limits: answers built on it are unreliable."""
        return bool(self.misfit_reasons)

    @property
    def inflation(self) -> float:
        """Factor (>= 1) on the variance of every answer for the model's misfit: the larger of
        chi2/dof and the held-out mean square residual."""
        vals = [v for v in (self.chi2_per_dof, self.loo_chi2_per_point) if v is not None and math.isfinite(v)]
        return max([1.0, *vals])

    def to_json(self) -> dict[str, Any]:
        f = lambda x: None if x is None or not math.isfinite(x) else float(x)  # noqa: E731
        return {"misfit": self.misfit, "misfit_reasons": list(self.misfit_reasons),
                "limits": {"chi2_per_dof": CHI2_LIMIT, "leave_one_out_abs_residual_sigma": LOO_LIMIT},
                "variance_inflation": self.inflation,
                "chi2_per_dof": f(self.chi2_per_dof), "max_abs_residual_sigma": f(self.max_abs_residual),
                "leave_one_out_max_abs_residual_sigma": f(self.loo_max_abs_residual),
                "leave_one_out_chi2_per_point": f(self.loo_chi2_per_point),
                "num_points": self.num_points, "worst_point": self.worst_point}

    def summary(self) -> str:
        parts = [f"{self.num_points} points"]
        if self.chi2_per_dof is not None:
            parts.append(f"chi2/dof {self.chi2_per_dof:.2f}")
        parts.append(f"max |res| {self.max_abs_residual:.1f} sigma")
        if self.loo_max_abs_residual is not None:
            parts.append(f"held-out max |res| {self.loo_max_abs_residual:.1f} sigma")
        if self.misfit:
            parts.append("MISFIT (" + "; ".join(self.misfit_reasons) + ")")
        return ", ".join(parts)


@dataclasses.dataclass(frozen=True)
class ResponseModel:
    """Lambda(s) and A(s) as functions of the six components' scale factors (1 = today)."""

    form: str
    weights: dict[str, float]  # w_c: 1/Lambda per unit scale
    curvature: dict[str, float]  # v_c (0 in the linear form)
    ln_a_coef: dict[str, float]
    ln_a_const: float
    sampled_min: dict[str, float]
    sampled_max: dict[str, float]
    unsampled: tuple[str, ...]
    quality: FitQuality
    #: u of the ``interaction`` form (0 otherwise)
    interaction: float = 0.0

    def is_sampled(self, component: str) -> bool:
        """Whether ``component`` moved on its own in the data (answers about it alone exist)."""
        return component not in self.unsampled

    # -- evaluation -----------------------------------------------------------------------
    def _vec(self, scales: Mapping[str, float] | None) -> dict[str, float]:
        scales = scales or {}
        bad = set(scales) - set(COMPONENTS)
        if bad:
            raise InputError(f"unknown components {sorted(bad)}", field="scales", allowed=", ".join(COMPONENTS))
        return {c: float(scales.get(c, 1.0)) for c in COMPONENTS}

    def terms(self, scales: Mapping[str, float] | None = None) -> dict[str, float]:
        """Each component's contribution to 1/Lambda at ``scales``."""
        s = self._vec(scales)
        return {c: self.weights[c] * s[c] + self.curvature[c] * s[c] ** 2 for c in COMPONENTS}

    def inverse_suppression(self, scales: Mapping[str, float] | None = None) -> float:
        inv = sum(self.terms(scales).values())
        if self.interaction:
            s = self._vec(scales)
            inv += self.interaction * float(pair_term(np.array([[s[c] for c in COMPONENTS]]))[0])
        return inv

    def suppression(self, scales: Mapping[str, float] | None = None) -> float:
        """Lambda at ``scales`` (inf for a perfect device)."""
        inv = self.inverse_suppression(scales)
        return math.inf if inv <= 0 else 1 / inv

    def ln_prefactor(self, scales: Mapping[str, float] | None = None) -> float:
        s = self._vec(scales)
        return self.ln_a_const + sum(self.ln_a_coef[c] * s[c] for c in COMPONENTS)

    def ln_eps(self, scales: Mapping[str, float] | None, distance: int) -> float:
        """ln of the logical error per cycle at ``distance`` (-inf for a perfect device)."""
        inv = self.inverse_suppression(scales)
        if inv <= 0:
            return -math.inf
        return self.ln_prefactor(scales) + (distance + 1) / 2 * math.log(inv)

    def logical_error_per_cycle(self, scales: Mapping[str, float] | None, distance: int) -> float:
        return math.exp(min(self.ln_eps(scales, distance), math.log(0.5)))  # no overflow: at most 1/2

    def ln_eps_array(self, scales: np.ndarray, distance: int) -> np.ndarray:
        """Vectorised :meth:`ln_eps` over rows of ``scales`` (shape (n, 6), COMPONENTS order)."""
        w = np.array([self.weights[c] for c in COMPONENTS])
        v = np.array([self.curvature[c] for c in COMPONENTS])
        a = np.array([self.ln_a_coef[c] for c in COMPONENTS])
        inv = self._inv_array(scales)
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(inv > 0, self.ln_a_const + scales @ a + (distance + 1) / 2 * np.log(np.maximum(inv, 1e-300)),
                            -np.inf)

    def _inv_array(self, scales: np.ndarray) -> np.ndarray:
        w = np.array([self.weights[c] for c in COMPONENTS])
        v = np.array([self.curvature[c] for c in COMPONENTS])
        return scales @ w + (scales**2) @ v + self.interaction * pair_term(scales)

    def suppression_array(self, scales: np.ndarray) -> np.ndarray:
        inv = self._inv_array(scales)
        with np.errstate(divide="ignore"):
            return np.where(inv > 0, 1 / np.maximum(inv, 1e-300), np.inf)

    def extrapolation(self, scales: Mapping[str, float]) -> list[str]:
        """Notes for each factor outside the sampled range of its component."""
        notes = []
        for c, v in self._vec(scales).items():
            lo, hi = self.sampled_min[c], self.sampled_max[c]
            if hi <= 0 and not (self.weights[c] or self.curvature[c]):
                continue  # a component the device does not have (leakage without its section)
            if v < lo * (1 - 1e-9):
                how = "perfect" if v <= 0 else f"x{lo / v:.2f}"
                notes.append(f"{c} factor {v:.3g} is below the smallest sampled {lo:g}: extrapolated {how}")
            elif v > hi * (1 + 1e-9):
                notes.append(f"{c} factor {v:.3g} is above the largest sampled {hi:g}: extrapolated x{v / hi:.2f}")
        return notes

    def weight_together(self) -> float:
        """The fitted weight of the components without their own sweep axis, together (0: none)."""
        return sum(self.weights[c] for c in self.unsampled)

    def to_json(self) -> dict[str, Any]:
        # a component without its own axis has no weight of its own (null); its group's is given
        own = lambda d: {c: (v if self.is_sampled(c) else None) for c, v in d.items()}  # noqa: E731
        return {"form": self.form, "weights": own(self.weights), "curvature": own(self.curvature),
                "interaction": self.interaction,
                "unsampled_weight_together": self.weight_together() if self.unsampled else None,
                "ln_prefactor": {"const": self.ln_a_const, "coef": own(self.ln_a_coef)},
                "sampled_min": dict(self.sampled_min), "sampled_max": dict(self.sampled_max),
                "unsampled_components": list(self.unsampled), "quality": self.quality.to_json()}



# ---------------------------------------------------------------------------------------------
# fitting


def _columns(scales: np.ndarray) -> tuple[list[list[int]], tuple[str, ...]]:
    """Group components whose scale columns are identical across the data (they cannot be told
    apart); each group is one fitted column. Returns the groups and the lumped components."""
    groups: list[list[int]] = []
    for j in range(scales.shape[1]):
        for g in groups:
            if np.allclose(scales[:, g[0]], scales[:, j]):
                g.append(j)
                break
        else:
            groups.append([j])
    lumped = tuple(COMPONENTS[j] for g in groups if len(g) > 1 for j in g)
    return groups, lumped


def pair_term(scales: np.ndarray) -> np.ndarray:
    """``sum_{c<c'} (s_c - 1)(s_c' - 1)`` per row of ``scales`` (shape (n, 6)): zero today and on
    every single-component axis, ``15 (s - 1)^2`` on the joint axis.

    >>> pair_term(np.array([[0.5] * 6, [0.5, 1, 1, 1, 1, 1]])).tolist()
    [3.75, 0.0]
    """
    x = np.asarray(scales, float) - 1.0
    return ((x.sum(axis=1)) ** 2 - (x**2).sum(axis=1)) / 2


def _design(scales: np.ndarray, groups: list[list[int]], form: str) -> np.ndarray:
    cols = [scales[:, g].mean(axis=1) for g in groups]
    if form == "quadratic":
        cols += [c**2 for c in cols]
    if form == "interaction":
        p = pair_term(scales)
        cols += [p, -p]  # two non-negative columns: a coefficient of either sign
    return np.stack(cols, axis=1)


def _pick_form(results: Mapping[str, tuple[np.ndarray, ...]], quality: Mapping[str, FitQuality]) -> str:
    """Linear unless it misfits (:attr:`FitQuality.misfit`); then the form whose held-out mean
    square, over the points both it and the linear form could hold out, is lowest, if it is
    below :data:`RICHER_GAIN` times the linear form's there."""
    if not quality["linear"].misfit:
        return "linear"
    lin = results["linear"][3]
    best, best_gain = "linear", RICHER_GAIN
    for form, r in results.items():
        if form == "linear" or not r[3].size:
            continue
        both = ~np.isnan(lin) & ~np.isnan(r[3])
        if both.sum() < max(3, 0.5 * np.count_nonzero(~np.isnan(lin))):
            continue  # too few held-out points to judge it on
        gain = _mean_square(r[3], both) / max(_mean_square(lin, both), 1e-300)
        if gain < best_gain:
            best, best_gain = form, gain
    return best


def _split_columns(coef: np.ndarray, groups: list[list[int]],
                   form: str) -> tuple[dict[str, float], dict[str, float]]:
    """Weights and curvatures per component; a lumped column's coefficient applies to the mean
    scale of its components, so it is split evenly between them."""
    weights = {c: 0.0 for c in COMPONENTS}
    curvature = {c: 0.0 for c in COMPONENTS}
    ng = len(groups)
    for gi, g in enumerate(groups):
        for j in g:
            weights[COMPONENTS[j]] = float(coef[gi]) / len(g)
            if form == "quadratic":
                curvature[COMPONENTS[j]] = float(coef[ng + gi]) / len(g)
    return weights, curvature


def _quality(data: ModelData, coef: np.ndarray, res: np.ndarray, loo: np.ndarray) -> FitQuality:
    dof = len(res) - int(np.count_nonzero(coef > 0))
    held = loo[~np.isnan(loo)] if loo.size else loo
    return FitQuality(
        chi2_per_dof=float(np.sum(res**2) / dof) if dof > 0 else None,
        max_abs_residual=float(np.max(np.abs(res))),
        loo_max_abs_residual=float(np.max(np.abs(held))) if held.size else None,
        loo_chi2_per_point=float(np.mean(held**2)) if held.size else None,
        num_points=len(res), worst_point=data.labels[int(np.argmax(np.abs(res)))])


def fit_response(data: ModelData, *, form: str | None = None, held_out: bool = True) -> ResponseModel:
    """Fit the response model; ``form=None`` picks linear unless it misfits and a richer form
    predicts the held-out points better."""
    if form is not None and form not in FORMS:
        raise InputError(f"{form!r} is not a model form", field="form", allowed=", ".join(FORMS))
    groups, lumped = _columns(data.scales)
    y, sig = data.inv_lambda, data.inv_sigma
    results, quality = {}, {}
    for f in [form] if form else list(FORMS):
        x = _design(data.scales, groups, f)
        coef = _solve(x, y, sig)
        results[f] = (x, coef, (y - x @ coef) / sig, _loo(x, y, sig) if held_out else np.array([]))
        quality[f] = _quality(data, *results[f][1:])
    chosen = form or _pick_form(results, quality)
    _, coef, res, loo = results[chosen]
    weights, curvature = _split_columns(coef, groups, chosen)
    # prefactor: weighted least squares, min-norm where under-determined
    xa = np.column_stack([np.ones(len(data.ln_a)), data.scales])
    wa = 1 / data.ln_a_sigma
    acoef, *_ = np.linalg.lstsq(xa * wa[:, None], data.ln_a * wa, rcond=None)
    return ResponseModel(
        form=chosen, weights=weights, curvature=curvature,
        ln_a_coef={c: float(acoef[1 + j]) for j, c in enumerate(COMPONENTS)},
        ln_a_const=float(acoef[0]),
        sampled_min={c: float(data.scales[:, j].min()) for j, c in enumerate(COMPONENTS)},
        sampled_max={c: float(data.scales[:, j].max()) for j, c in enumerate(COMPONENTS)},
        unsampled=lumped, quality=quality[chosen],
        interaction=float(coef[-2] - coef[-1]) if chosen == "interaction" else 0.0)


def fit_model(report: FitReport, *, form: str | None = None) -> ResponseModel:
    """Response model from a :class:`~planner.fits.FitReport` (needs at least one Lambda)."""
    return fit_response(ModelData.from_fits(report), form=form)

