"""Suppression: the Lambda line fit from per-distance rates, its windows and drift with distance,
and the joint-scale threshold.

Windows: Lambda is also fitted over every run of two and of three consecutive sampled distances
(:class:`LambdaWindow`). With more than three distances, the Lambda used for projection
(:attr:`LambdaFit.suppression`, :attr:`LambdaFit.ln_prefactor`, :attr:`LambdaFit.distances`) is
the one of the largest window, the three largest distances: what the largest distances say.

Drift: whether Lambda changes with d is tested with a weighted quadratic in ``k = (d + 1) / 2``,
``ln eps_d = a + b k + c k^2``. The local ln Lambda is ``-(b + 2 c k)``, so ln Lambda changes by
``-2 c`` per step d -> d + 2: the slope of ln Lambda against the window centre, with the
covariance of overlapping windows taken care of by fitting the points once (:class:`LambdaDrift`).
Its interval is ``+- Z sigma`` (sigma inflated by sqrt(chi2/dof) where that exceeds 1); the drift
is called significant when that interval excludes 0.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from planner.errors import InputError
from planner.fits.rates import Z_SCORE, DistanceFit, Interval, _num

@dataclasses.dataclass(frozen=True, kw_only=True)
class LambdaWindow:
    """Lambda fitted over one run of consecutive sampled distances."""

    distances: tuple[int, ...]
    suppression: Interval
    ln_prefactor: Interval

    @property
    def centre(self) -> float:
        """Mean distance of the window."""
        return sum(self.distances) / len(self.distances)

    def to_json(self) -> dict[str, Any]:
        return {"distances": list(self.distances), "centre": self.centre,
                "suppression_factor": self.suppression.to_json(), "ln_prefactor": self.ln_prefactor.to_json()}


@dataclasses.dataclass(frozen=True, kw_only=True)
class LambdaDrift:
    """How ln Lambda changes per step d -> d + 2 (weighted quadratic of ln eps in (d+1)/2)."""

    per_step: Interval
    significant: bool
    chi2_per_dof: float | None
    method: str = "weighted quadratic ln eps_d = a + b k + c k^2, k = (d+1)/2; drift = -2c per step d -> d+2"

    @property
    def ratio_per_step(self) -> Interval:
        """Lambda at d + 2 over Lambda at d (1 = no drift)."""
        return self.per_step.map(math.exp)

    def to_json(self) -> dict[str, Any]:
        return {"ln_lambda_change_per_step": self.per_step.to_json(),
                "lambda_ratio_per_step": self.ratio_per_step.to_json(), "significant": self.significant,
                "chi2_per_dof": _num(self.chi2_per_dof) if self.chi2_per_dof is not None else None,
                "method": self.method}


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
    #: every distance with a usable rate at this point (``distances``: those fitted for projection)
    sampled_distances: tuple[int, ...] = ()
    #: Lambda over each run of two and three consecutive sampled distances
    windows: tuple[LambdaWindow, ...] = ()
    #: the change of ln Lambda with d (None with fewer than three distances)
    drift: LambdaDrift | None = None

    @property
    def window_spread(self) -> float:
        """Largest |ln Lambda_window - ln Lambda| over the windows (0 with fewer than two)."""
        if self.suppression is None or not self.windows:
            return 0.0
        ref = math.log(self.suppression.best)
        return max((abs(math.log(w.suppression.best) - ref) for w in self.windows), default=0.0)

    def to_json(self) -> dict[str, Any]:
        return {"axis": self.axis, "factor": self.factor, "scales": dict(self.scales),
                "distances": list(self.distances), "sampled_distances": list(self.sampled_distances),
                "windows": [w.to_json() for w in self.windows],
                "drift": self.drift.to_json() if self.drift else None,
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


def lambda_drift(distances: Sequence[int], ln_eps: Sequence[float], log_sigmas: Sequence[float]) -> LambdaDrift | None:
    """The change of ln Lambda per step d -> d + 2 (None with fewer than three distinct distances).

    >>> ks = [2, 3, 4, 5]  # ln Lambda = 1.0 at d = 3 -> 5, growing by 0.1 per step
    >>> ln_eps = [-2.0, -3.0, -4.1, -5.3]
    >>> dr = lambda_drift([3, 5, 7, 9], ln_eps, [0.01] * 4)
    >>> round(dr.per_step.best, 6), dr.significant
    (0.1, True)
    """
    k = np.array([(d + 1) / 2 for d in distances], float)
    if len(set(k.tolist())) < 3:
        return None
    y, w = np.asarray(ln_eps, float), 1.0 / np.asarray(log_sigmas, float)
    x = np.stack([np.ones_like(k), k, k * k], axis=1)
    coef, *_ = np.linalg.lstsq(x * w[:, None], y * w, rcond=None)
    cov = np.linalg.inv((x * w[:, None]).T @ (x * w[:, None]))
    dof = len(k) - 3
    chi = float(np.sum((w * (y - x @ coef)) ** 2) / dof) if dof > 0 else None
    se = 2 * math.sqrt(cov[2, 2]) * (math.sqrt(chi) if chi is not None and chi > 1 else 1.0)
    per_step = _z_interval(-2 * float(coef[2]), se)
    return LambdaDrift(per_step=per_step, significant=not per_step.low <= 0 <= per_step.high, chi2_per_dof=chi)


def _columns(points: Sequence[DistanceFit]) -> tuple[list[int], list[float], list[float]]:
    """Distances, ln eps and log sigmas of ``points`` (nonzero rates)."""
    return ([p.distance for p in points], [math.log(p.per_cycle.best) for p in points],
            [p.log_sigma for p in points])


def lambda_windows(points: Sequence[DistanceFit]) -> tuple[LambdaWindow, ...]:
    """Lambda over every run of two and of three consecutive distances of ``points`` (sorted by
    distance, one per distance, nonzero rates), in order of size then centre."""
    out = []
    for size in (2, 3):
        for i in range(len(points) - size + 1):
            run = points[i:i + size]
            line = suppression_line(*_columns(run))
            out.append(LambdaWindow(distances=tuple(p.distance for p in run),
                                    suppression=_z_interval(-line.slope, line.slope_se).map(math.exp),
                                    ln_prefactor=_z_interval(line.intercept, line.intercept_se)))
    return tuple(out)


#: distances the projection Lambda is fitted over when more are sampled (the largest ones)
PROJECTION_WINDOW = 3


def fit_lambda(points: Sequence[DistanceFit]) -> LambdaFit:
    """Lambda at one scale point from its per-distance rates (all of the same point): over all its
    distances, or over the :data:`PROJECTION_WINDOW` largest when more are sampled; with the
    windows and the drift of Lambda with d."""
    p0 = points[0]
    pts = sorted(points, key=lambda p: p.distance)
    ds = tuple(p.distance for p in pts)
    zero = any(p.zero_errors for p in pts)
    point = dict(axis=p0.axis, factor=p0.factor, scales=p0.scales, uses_zero_error_points=zero)
    if len(set(ds)) < 2:
        return LambdaFit(**point, distances=ds, suppression=None, ln_prefactor=None, chi2_per_dof=None,
                         note=f"only distance {ds[0]} sampled: Lambda needs two distances")
    usable = [p for p in pts if p.per_cycle.best > 0]
    if len({p.distance for p in usable}) < 2:
        return LambdaFit(**point, distances=ds, suppression=None, ln_prefactor=None, chi2_per_dof=None,
                         note="rates at fewer than two distances are nonzero: no Lambda")
    used = usable[-PROJECTION_WINDOW:] if len(usable) > PROJECTION_WINDOW else usable
    line = suppression_line(*_columns(used))
    lam = _z_interval(-line.slope, line.slope_se).map(math.exp)
    drift = lambda_drift(*_columns(usable))
    return LambdaFit(**point, distances=tuple(p.distance for p in used),
                     suppression=lam, ln_prefactor=_z_interval(line.intercept, line.intercept_se),
                     chi2_per_dof=line.chi2_per_dof, note="includes zero-error points at their upper bound: Lambda leans low" if zero else "",
                     sampled_distances=tuple(p.distance for p in usable), windows=lambda_windows(usable),
                     drift=drift)


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


