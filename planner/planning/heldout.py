"""Weighted non-negative least squares and its held-out (leave-one-out) residuals, for the
response model's forms."""

from __future__ import annotations

import math

import numpy as np
from scipy.optimize import nnls


def solve(x: np.ndarray, y: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    coef, _ = nnls(x / sigma[:, None], y / sigma)
    return coef


def held_out_residuals(x: np.ndarray, y: np.ndarray, sigma: np.ndarray) -> np.ndarray:
    """Held-out residuals: refit without point i, predict it; the residual is divided by the
    point's sigma combined with the prediction's (unconstrained) standard error. Points whose
    removal leaves a column undetermined (a component's only own point) cannot be held out: nan."""
    n = len(y)
    z = np.full(n, np.nan)
    used = np.any(np.abs(x) > 0, axis=0)
    for i in range(n):
        keep = np.arange(n) != i
        xk = x[keep] / sigma[keep, None]
        xu = independent(xk[:, used])
        if np.linalg.matrix_rank(xu) < xu.shape[1] or keep.sum() <= xu.shape[1]:
            continue
        coef = solve(x[keep], y[keep], sigma[keep])
        cov = np.linalg.pinv(xk[:, used].T @ xk[:, used])
        var = float(x[i, used] @ cov @ x[i, used])
        z[i] = (y[i] - x[i] @ coef) / math.sqrt(sigma[i] ** 2 + var)
    return z


def independent(x: np.ndarray) -> np.ndarray:
    """The columns of ``x`` without exact negatives of an earlier one (the +/- pairs of a signed
    coefficient count once)."""
    keep = [j for j in range(x.shape[1]) if not any(np.allclose(x[:, j], -x[:, i]) and np.any(x[:, i])
                                                    for i in range(j))]
    return x[:, keep]


def mean_square(z: np.ndarray, mask: np.ndarray) -> float:
    return float(np.mean(z[mask] ** 2)) if mask.any() else math.inf
