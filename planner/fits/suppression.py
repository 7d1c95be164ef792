"""Suppression: the Lambda line fit from per-distance rates, and the joint-scale threshold."""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from planner.errors import InputError
from planner.fits.rates import Z_SCORE, DistanceFit, Interval, _num

@dataclasses.dataclass(frozen=True, kw_only=True)
class LambdaFit:
    """Suppression factor at one scale point from eps_d across distances.

    ``suppression`` is None when fewer than two distances were sampled (``note`` says so).
    """

    axis: str
    factor: float
    scales: dict[str, float]
    distances: tuple[int, ...]
    suppression: Interval | None
    ln_prefactor: Interval | None
    chi2_per_dof: float | None
    uses_zero_error_points: bool
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"axis": self.axis, "factor": self.factor, "scales": dict(self.scales),
                "distances": list(self.distances),
                "suppression_factor": self.suppression.to_json() if self.suppression else None,
                "ln_prefactor": self.ln_prefactor.to_json() if self.ln_prefactor else None,
                "chi2_per_dof": _num(self.chi2_per_dof) if self.chi2_per_dof is not None else None,
                "uses_zero_error_points": self.uses_zero_error_points, "note": self.note}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Threshold:
    """Joint scale factor where Lambda crosses 1 (None when the sampled range does not bracket it)."""

    factor: Interval | None
    note: str

    def to_json(self) -> dict[str, Any]:
        return {"joint_factor": self.factor.to_json() if self.factor else None, "note": self.note}



# ---------------------------------------------------------------------------------------------
# Lambda


@dataclasses.dataclass(frozen=True, kw_only=True)
class LineFit:
    """Weighted least squares ``y = intercept + slope * x`` with standard errors."""

    intercept: float
    slope: float
    intercept_se: float
    slope_se: float
    chi2_per_dof: float | None


def weighted_line(x: Sequence[float], y: Sequence[float], sigma: Sequence[float]) -> LineFit:
    """WLS line through (x, y) with sigmas; needs two distinct x.

    >>> f = weighted_line([2, 3, 4], [-3.0, -4.0, -5.0], [0.1, 0.1, 0.1])
    >>> round(f.slope, 6), round(f.intercept, 6)
    (-1.0, -1.0)
    """
    xa, ya, w = np.asarray(x, float), np.asarray(y, float), 1.0 / np.asarray(sigma, float) ** 2
    if len(set(xa.tolist())) < 2:
        raise InputError("a line needs at least two distinct x values", field="x")
    sw, swx, swy = w.sum(), (w * xa).sum(), (w * ya).sum()
    swxx, swxy = (w * xa * xa).sum(), (w * xa * ya).sum()
    det = sw * swxx - swx**2
    slope = (sw * swxy - swx * swy) / det
    intercept = (swxx * swy - swx * swxy) / det
    slope_se, intercept_se = math.sqrt(sw / det), math.sqrt(swxx / det)
    chi = None
    dof = len(xa) - 2
    if dof > 0:
        chi = float((w * (ya - intercept - slope * xa) ** 2).sum() / dof)
        if chi > 1:  # scatter beyond the intervals: widen (common practice, no source)
            slope_se *= math.sqrt(chi)
            intercept_se *= math.sqrt(chi)
    return LineFit(intercept=float(intercept), slope=float(slope), intercept_se=intercept_se,
                   slope_se=slope_se, chi2_per_dof=chi)


def suppression_line(distances: Sequence[int], ln_eps: Sequence[float], log_sigmas: Sequence[float]) -> LineFit:
    """The Lambda fit: weighted line ``ln eps_d = ln A - k ln Lambda`` with ``k = (d + 1) / 2``;
    ``-slope`` is ln Lambda and ``intercept`` is ln A (the one place this line is fitted).

    >>> line = suppression_line([3, 5, 7], [math.log(1e-2), math.log(5e-3), math.log(2.5e-3)], [0.1] * 3)
    >>> round(math.exp(-line.slope), 6), round(math.exp(line.intercept), 6)
    (2.0, 0.04)
    """
    return weighted_line([(d + 1) / 2 for d in distances], ln_eps, log_sigmas)


def _z_interval(center: float, se: float) -> Interval:
    return Interval(low=center - Z_SCORE * se, best=center, high=center + Z_SCORE * se)


def fit_lambda(points: Sequence[DistanceFit]) -> LambdaFit:
    """Lambda at one scale point from its per-distance rates (all of the same point)."""
    p0 = points[0]
    pts = sorted(points, key=lambda p: p.distance)
    ds = tuple(p.distance for p in pts)
    zero = any(p.zero_errors for p in pts)
    point = dict(axis=p0.axis, factor=p0.factor, scales=p0.scales, distances=ds, uses_zero_error_points=zero)
    if len(set(ds)) < 2:
        return LambdaFit(**point, suppression=None, ln_prefactor=None, chi2_per_dof=None,
                         note=f"only distance {ds[0]} sampled: Lambda needs two distances")
    usable = [p for p in pts if p.per_cycle.best > 0]
    if len({p.distance for p in usable}) < 2:
        return LambdaFit(**point, suppression=None, ln_prefactor=None, chi2_per_dof=None,
                         note="rates at fewer than two distances are nonzero: no Lambda")
    line = suppression_line([p.distance for p in usable], [math.log(p.per_cycle.best) for p in usable],
                            [p.log_sigma for p in usable])
    lam = _z_interval(-line.slope, line.slope_se).map(math.exp)
    note = "includes zero-error points at their upper bound: Lambda leans low" if zero else ""
    return LambdaFit(**point, suppression=lam, ln_prefactor=_z_interval(line.intercept, line.intercept_se),
                     chi2_per_dof=line.chi2_per_dof, note=note)


def fit_threshold(lambdas: Sequence[LambdaFit]) -> Threshold:
    """Joint factor where Lambda = 1, interpolating ln Lambda against ln s between the two
    sampled joint points that bracket it (best, low and high lines separately)."""
    joint = sorted((lf for lf in lambdas if lf.axis == "joint" and lf.suppression), key=lambda lf: lf.factor)
    if len(joint) < 2:
        return Threshold(factor=None, note="fewer than two joint points with a Lambda: no threshold estimate")

    def crossing(get: Any) -> float | None:
        for a, b in zip(joint, joint[1:]):
            ya, yb = math.log(get(a.suppression)), math.log(get(b.suppression))
            if ya >= 0 >= yb and ya != yb:
                xa, xb = math.log(a.factor), math.log(b.factor)
                return math.exp(xa + (xb - xa) * ya / (ya - yb))
        return None

    best = crossing(lambda iv: iv.best)
    if best is None:
        lo_f, hi_f = joint[0].factor, joint[-1].factor
        if joint[-1].suppression.best > 1:
            return Threshold(factor=None, note=f"Lambda > 1 at every sampled joint factor (up to {hi_f:g}): "
                             "threshold lies above the sampled range")
        return Threshold(factor=None, note=f"Lambda <= 1 at every sampled joint factor (down to {lo_f:g}): "
                         "threshold lies below the sampled range")
    # a higher Lambda curve crosses 1 at a larger factor
    low = crossing(lambda iv: iv.low)
    high = crossing(lambda iv: iv.high)
    return Threshold(factor=Interval(low=low if low is not None else 0.0, best=best,
                                     high=high if high is not None else math.inf),
                     note="interpolated ln Lambda vs ln s between bracketing joint points"
                     + ("" if low is not None and high is not None else "; an interval end is outside the sampled range"))


