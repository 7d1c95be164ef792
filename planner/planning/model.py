"""The response model: how Lambda and the prefactor A depend on each component's scale factor.

Error-budget form (``linear``): ``1/Lambda = sum_c w_c s_c`` with ``w_c >= 0`` (weighted NNLS):
every component adds its share of "distance to threshold", a perfect device has no logical error.
If held-out points disagree beyond their intervals, the ``quadratic`` form adds a non-negative
curvature term per component, ``1/Lambda = sum_c (w_c s_c + v_c s_c^2)``, and is kept when it
predicts the held-out points better. The prefactor is ``ln A = a_0 + sum_c a_c s_c`` (weighted
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
from scipy.optimize import nnls

from planner.config import COMPONENTS
from planner.errors import InputError
from planner.fits import Z_SCORE, FitReport, LambdaFit

FORMS = ("linear", "quadratic")
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
#: leave-one-out |residual|/sigma beyond which the linear form is considered inadequate
#: (common practice, no source: ~3 sigma)
LOO_LIMIT = 3.0


#: the codes planner plans for, and how many physical qubits a distance-d patch of each uses
CODES = ("surface", "repetition")


def _check_code(code: str) -> None:
    if code not in CODES:
        raise InputError(f"{code!r} is not a code planner plans for", field="code", allowed=", ".join(CODES))


def physical_qubits(distance: int, code: str = "surface") -> int:
    """Physical qubits of one distance-``distance`` memory: ``2 d^2 - 1`` for the rotated surface
    code (d^2 data + d^2 - 1 measure qubits; Google Quantum AI, Nature 638, 920 (2025)), ``2 d - 1``
    for the repetition code (d data + d - 1 measure qubits, common practice).

    >>> physical_qubits(7), physical_qubits(7, "repetition")
    (97, 13)
    """
    _check_code(code)
    return 2 * distance - 1 if code == "repetition" else 2 * distance * distance - 1


def qubit_rule(code: str = "surface") -> str:
    """The qubit count of :func:`physical_qubits` as a short formula for tables.

    >>> qubit_rule(), qubit_rule("repetition")
    ('2d^2-1', '2d-1')
    """
    _check_code(code)
    return "2d-1" if code == "repetition" else "2d^2-1"


def largest_distance_within(qubits: int, code: str = "surface") -> int | None:
    """Largest odd d >= 3 with ``physical_qubits(d, code) <= qubits`` (None if even d = 3 does not
    fit).

    >>> largest_distance_within(97), largest_distance_within(96), largest_distance_within(10)
    (7, 5, None)
    >>> largest_distance_within(13, "repetition"), largest_distance_within(12, "repetition")
    (7, 5)
    """
    _check_code(code)
    qubits = int(qubits)
    if code == "repetition":
        d = (qubits + 1) // 2
    else:
        d = int(math.isqrt(max(qubits + 1, 0) // 2))
    if d % 2 == 0:
        d -= 1
    while d >= 3 and physical_qubits(d, code) > qubits:
        d -= 2
    return d if d >= 3 else None


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

    def to_json(self) -> dict[str, Any]:
        f = lambda x: None if x is None or not math.isfinite(x) else float(x)  # noqa: E731
        return {"chi2_per_dof": f(self.chi2_per_dof), "max_abs_residual_sigma": f(self.max_abs_residual),
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
        return sum(self.terms(scales).values())

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
        inv = scales @ w + (scales**2) @ v
        with np.errstate(divide="ignore"):
            return self.ln_a_const + scales @ a + (distance + 1) / 2 * np.log(inv)

    def suppression_array(self, scales: np.ndarray) -> np.ndarray:
        w = np.array([self.weights[c] for c in COMPONENTS])
        v = np.array([self.curvature[c] for c in COMPONENTS])
        with np.errstate(divide="ignore"):
            return 1 / (scales @ w + (scales**2) @ v)

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


def _design(scales: np.ndarray, groups: list[list[int]], form: str) -> np.ndarray:
    cols = [scales[:, g].mean(axis=1) for g in groups]
    if form == "quadratic":
        cols += [c**2 for c in cols]
    return np.stack(cols, axis=1)


def _solve(x: np.ndarray, y: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    coef, _ = nnls(x / sigma[:, None], y / sigma)
    return coef


def _loo(x: np.ndarray, y: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """Held-out residuals: refit without point i, predict it; the residual is divided by the
    point's sigma combined with the prediction's (unconstrained) standard error. Points whose
    removal leaves a column undetermined (a component's only own point) cannot be held out."""
    n = len(y)
    z = []
    for i in range(n):
        keep = np.arange(n) != i
        xk = x[keep] / sigma[keep, None]
        used = np.any(np.abs(x) > 0, axis=0)
        if np.linalg.matrix_rank(xk[:, used]) < used.sum() or keep.sum() <= used.sum():
            continue
        coef = _solve(x[keep], y[keep], sigma[keep])
        cov = np.linalg.pinv(xk[:, used].T @ xk[:, used])
        var = float(x[i, used] @ cov @ x[i, used])
        z.append((y[i] - x[i] @ coef) / math.sqrt(sigma[i] ** 2 + var))
    return np.array(z)


def _pick_form(results: Mapping[str, tuple[np.ndarray, ...]]) -> str:
    """Linear, unless it misses a held-out point by more than :data:`LOO_LIMIT` sigma and the
    quadratic form predicts the held-out points better."""
    lin_loo, quad_loo = results["linear"][3], results["quadratic"][3]
    if lin_loo.size and np.max(np.abs(lin_loo)) > LOO_LIMIT and \
            quad_loo.size and np.sum(quad_loo**2) < np.sum(lin_loo**2):
        return "quadratic"
    return "linear"


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
    return FitQuality(
        chi2_per_dof=float(np.sum(res**2) / dof) if dof > 0 else None,
        max_abs_residual=float(np.max(np.abs(res))),
        loo_max_abs_residual=float(np.max(np.abs(loo))) if loo.size else None,
        loo_chi2_per_point=float(np.mean(loo**2)) if loo.size else None,
        num_points=len(res), worst_point=data.labels[int(np.argmax(np.abs(res)))])


def fit_response(data: ModelData, *, form: str | None = None, held_out: bool = True) -> ResponseModel:
    """Fit the response model; ``form=None`` picks linear unless held-out points call for curvature."""
    if form is not None and form not in FORMS:
        raise InputError(f"{form!r} is not a model form", field="form", allowed=", ".join(FORMS))
    groups, lumped = _columns(data.scales)
    y, sig = data.inv_lambda, data.inv_sigma
    results = {}
    for f in [form] if form else list(FORMS):
        x = _design(data.scales, groups, f)
        coef = _solve(x, y, sig)
        results[f] = (x, coef, (y - x @ coef) / sig, _loo(x, y, sig) if held_out else np.array([]))
    chosen = form or _pick_form(results)
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
        unsampled=lumped, quality=_quality(data, coef, res, loo))


def fit_model(report: FitReport, *, form: str | None = None) -> ResponseModel:
    """Response model from a :class:`~planner.fits.FitReport` (needs at least one Lambda)."""
    return fit_response(ModelData.from_fits(report), form=form)

