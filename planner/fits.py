"""Fits: logical error per cycle with intervals, the suppression factor Lambda per scale point,
and the joint-scale threshold.

Input is a list of :class:`sinter.TaskStats` whose ``json_metadata`` carries the shared key set
``{"code", "d", "basis", "rounds", "axis", "factor", "scales"}``. Every rate comes with a
likelihood-ratio interval at :data:`CONFIDENCE` (Wilks: a likelihood within a factor
:data:`LIKELIHOOD_FACTOR` of the maximum).

How things are combined (stated once, here):

- per cycle: ``sinter.fit_binomial`` on the shot error rate, then
  ``sinter.shot_error_rate_to_piece_error_rate(pieces=rounds)`` on low, best and high;
- X and Z bases at one (point, distance): ``best`` is the mean of the bases' bests; each side of
  the interval is the mean plus or minus the root-sum-square of the bases' half-widths on that
  side, divided by the number of bases (independent estimates);
- Lambda at one point: weighted least squares of ``ln eps_d = ln A - k ln Lambda`` with
  ``k = (d+1)/2``; the weight of a point is ``1/sigma^2`` with ``sigma`` the half-width of its
  interval in log space divided by the normal quantile; when the line has more than two points
  and chi2/dof > 1 the standard errors are inflated by sqrt(chi2/dof) (common practice);
- a point with zero observed errors enters at the upper end of its interval (flagged) with a log
  sigma of :data:`ZERO_ERROR_LOG_SIGMA`, so it pulls the line but cannot dominate it.

>>> round(LIKELIHOOD_FACTOR, 3)
6.826
"""

from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Sequence
from typing import Any

import numpy as np
import sinter
from scipy.stats import chi2, norm

from planner.errors import InputError

CONFIDENCE = 0.95
LIKELIHOOD_FACTOR = math.exp(chi2.ppf(CONFIDENCE, 1) / 2)
#: normal quantile matching :data:`CONFIDENCE` (two-sided), used to turn widths into sigmas
Z_SCORE = float(norm.ppf(0.5 + CONFIDENCE / 2))
#: log-space sigma given to a zero-error point (it is only an upper bound)
ZERO_ERROR_LOG_SIGMA = 1.0


@dataclasses.dataclass(frozen=True, kw_only=True)
class Interval:
    """A best estimate with a :data:`CONFIDENCE` interval ``[low, high]`` (same units as best).

    Keyword-only, in the order of :class:`sinter.Fit` (low, best, high):

    >>> Interval(low=1.0, best=2.0, high=3.0).map(lambda x: 2 * x)
    Interval(best=4.0, low=2.0, high=6.0)
    """

    best: float
    low: float
    high: float

    def to_json(self) -> dict[str, float | None]:
        return {k: _num(getattr(self, k)) for k in ("best", "low", "high")}

    def overlaps(self, other: Interval) -> bool:
        return self.low <= other.high and other.low <= self.high

    def map(self, f: Any) -> Interval:
        """Apply a monotone increasing function to all three numbers."""
        return Interval(low=f(self.low), best=f(self.best), high=f(self.high))

    @property
    def half_width(self) -> float:
        """Half of ``high - low`` (the interval's full width is twice this)."""
        return (self.high - self.low) / 2

    @property
    def relative_half_width(self) -> float:
        """:attr:`half_width` relative to :attr:`best` (inf when best is 0).

        >>> round(Interval(low=1.8, best=2.0, high=2.2).relative_half_width, 9)
        0.1
        """
        return self.half_width / abs(self.best) if self.best else math.inf


def _num(x: float) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


@dataclasses.dataclass(frozen=True, kw_only=True)
class TaskFit:
    """One task: shots, errors, the shot error rate and the logical error per cycle."""

    axis: str
    factor: float
    scales: dict[str, float]
    code: str
    distance: int
    basis: str
    rounds: int
    shots: int
    errors: int
    shot_error: Interval
    per_cycle: Interval

    @property
    def zero_errors(self) -> bool:
        return self.errors == 0

    def to_json(self) -> dict[str, Any]:
        return {"axis": self.axis, "factor": self.factor, "scales": dict(self.scales),
                "code": self.code, "d": self.distance, "basis": self.basis, "rounds": self.rounds,
                "shots": self.shots, "errors": self.errors, "zero_errors": self.zero_errors,
                "shot_error": self.shot_error.to_json(),
                "logical_error_per_cycle": self.per_cycle.to_json()}


@dataclasses.dataclass(frozen=True, kw_only=True)
class DistanceFit:
    """Logical error per cycle at one (scale point, distance), bases combined."""

    axis: str
    factor: float
    scales: dict[str, float]
    distance: int
    bases: tuple[str, ...]
    per_cycle: Interval
    zero_errors: bool
    #: log-space sigma used as this point's weight in the Lambda fit
    log_sigma: float

    def to_json(self) -> dict[str, Any]:
        return {"axis": self.axis, "factor": self.factor, "d": self.distance,
                "bases": list(self.bases), "zero_errors": self.zero_errors,
                "logical_error_per_cycle": self.per_cycle.to_json()}


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


@dataclasses.dataclass(frozen=True, kw_only=True)
class FitReport:
    """Everything fitted from one set of samples."""

    tasks: tuple[TaskFit, ...]
    distances: tuple[DistanceFit, ...]
    lambdas: tuple[LambdaFit, ...]
    threshold: Threshold
    notes: tuple[str, ...] = ()

    @property
    def sampled_distances(self) -> tuple[int, ...]:
        return tuple(sorted({t.distance for t in self.tasks}))

    def lambda_at(self, axis: str, factor: float) -> LambdaFit | None:
        for lf in self.lambdas:
            if lf.axis == axis and math.isclose(lf.factor, factor, rel_tol=1e-9):
                return lf
        return None

    def today(self) -> LambdaFit | None:
        return self.lambda_at("joint", 1.0)

    def to_json(self) -> dict[str, Any]:
        return {"confidence": CONFIDENCE,
                "tasks": [t.to_json() for t in self.tasks],
                "per_distance": [d.to_json() for d in self.distances],
                "lambda": [lf.to_json() for lf in self.lambdas],
                "threshold": self.threshold.to_json(), "notes": list(self.notes)}


# ---------------------------------------------------------------------------------------------
# per task


def per_cycle_rate(shot_error: Any, *, rounds: Any) -> Any:
    """Logical error per cycle from the shot error rate after ``rounds`` cycles (float or numpy
    arrays): the inverse of :func:`shot_rate`, ``eps = (1 - (1 - 2 P)^(1/r)) / 2``, the same as
    ``sinter.shot_error_rate_to_piece_error_rate(P, pieces=r)`` (a rate above 1/2 mirrors:
    ``1 - eps(1 - P)``). The one place this formula is written.

    >>> round(per_cycle_rate(0.01, rounds=5), 6)
    0.002016
    >>> all(abs(per_cycle_rate(p, rounds=7) - sinter.shot_error_rate_to_piece_error_rate(p, pieces=7)) < 1e-15
    ...     for p in (1e-9, 0.2, 0.5, 0.7))
    True
    >>> per_cycle_rate(np.array([0.0, 0.5]), rounds=3).tolist()
    [0.0, 0.5]
    """
    p = np.asarray(shot_error, float)
    q = np.minimum(p, 1 - p)
    with np.errstate(invalid="ignore", divide="ignore"):
        eps = -np.expm1(np.log1p(-2 * q) / np.asarray(rounds, float)) / 2
    out = np.where(p > 0.5, 1 - eps, eps)
    return float(out) if out.ndim == 0 else out


def shot_rate(eps: float, rounds: int) -> float:
    """Shot error rate after ``rounds`` cycles of per-cycle rate ``eps`` (the inverse of
    :func:`per_cycle_rate`): ``P = (1 - (1 - 2 eps)^r) / 2``.

    >>> round(per_cycle_rate(shot_rate(0.001, 9), rounds=9), 12)
    0.001
    """
    return (1 - (1 - 2 * eps) ** rounds) / 2


def per_cycle_interval(*, shots: int, errors: int, rounds: int) -> tuple[Interval, Interval]:
    """Shot error rate and logical error per cycle, each with a :data:`CONFIDENCE` interval.

    >>> shot, cyc = per_cycle_interval(shots=10_000, errors=100, rounds=5)
    >>> round(shot.best, 4), round(cyc.best, 6)
    (0.01, 0.002016)
    """
    if shots <= 0:
        raise InputError("must be positive", field="shots")
    fit = sinter.fit_binomial(num_shots=shots, num_hits=errors, max_likelihood_factor=LIKELIHOOD_FACTOR)
    shot = Interval(low=fit.low, best=fit.best, high=fit.high)
    cyc = shot.map(lambda p: per_cycle_rate(p, rounds=rounds))
    return shot, cyc


def zero_error_upper(shots: int) -> float:
    """Upper end of the likelihood-ratio interval for 0 hits in ``shots``: (1-p)^n = 1/LF.

    >>> p = zero_error_upper(1000); abs(p - sinter.fit_binomial(num_shots=1000, num_hits=0, max_likelihood_factor=LIKELIHOOD_FACTOR).high) < 1e-3 * p
    True
    """
    return -math.expm1(-math.log(LIKELIHOOD_FACTOR) / shots)


def _meta(stat: sinter.TaskStats) -> dict[str, Any]:
    m = stat.json_metadata
    if not isinstance(m, dict) or not {"d", "axis", "factor", "rounds"} <= m.keys():
        raise InputError(f"task {stat.strong_id[:12]} lacks the planner metadata keys: {m!r}",
                         field="json_metadata", allowed="d, axis, factor, rounds (and code, basis, scales)")
    return m


def fit_tasks(stats: Sequence[sinter.TaskStats]) -> tuple[TaskFit, ...]:
    """Per-task fits, tasks with no kept shots skipped, sorted by (axis, factor, d, basis)."""
    out = []
    for s in stats:
        m = _meta(s)
        kept = s.shots - s.discards
        if kept <= 0:
            continue
        shot, cyc = per_cycle_interval(shots=kept, errors=s.errors, rounds=int(m["rounds"]))
        out.append(TaskFit(axis=str(m["axis"]), factor=float(m["factor"]),
                           scales={k: float(v) for k, v in m.get("scales", {}).items()},
                           code=str(m.get("code", "surface")), distance=int(m["d"]),
                           basis=str(m.get("basis", "z")), rounds=int(m["rounds"]),
                           shots=kept, errors=s.errors, shot_error=shot, per_cycle=cyc))
    out.sort(key=lambda t: (t.axis != "joint", t.axis, t.factor, t.distance, t.basis))
    return tuple(out)


def log_sigma(iv: Interval, *, zero_errors: bool) -> float:
    """Log-space sigma of a rate from its interval (the weight of a point in the Lambda fit)."""
    if zero_errors or iv.low <= 0 or iv.best <= 0:
        return ZERO_ERROR_LOG_SIGMA
    return max((math.log(iv.high) - math.log(iv.low)) / (2 * Z_SCORE), 1e-6)


def combine_bases(group: Sequence[TaskFit]) -> tuple[Interval, bool]:
    """Mean of the bases' per-cycle rates; each side widened by root-sum-square / n.

    A zero-error basis enters at its upper end (so the combined best is an upper-leaning value).
    """
    n = len(group)
    bests = [t.per_cycle.high if t.zero_errors else t.per_cycle.best for t in group]
    best = sum(bests) / n
    lo = math.sqrt(sum((b - t.per_cycle.low) ** 2 for b, t in zip(bests, group))) / n
    hi = math.sqrt(sum((t.per_cycle.high - b) ** 2 for b, t in zip(bests, group))) / n
    return Interval(low=max(best - lo, 0.0), best=best, high=best + hi), all(t.zero_errors for t in group)


def fit_distances(tasks: Sequence[TaskFit]) -> tuple[DistanceFit, ...]:
    groups: dict[tuple[str, float, int], list[TaskFit]] = defaultdict(list)
    for t in tasks:
        groups[(t.axis, t.factor, t.distance)].append(t)
    out = []
    for (axis, factor, d), group in groups.items():
        iv, all_zero = combine_bases(group)
        any_zero = any(t.zero_errors for t in group)
        out.append(DistanceFit(axis=axis, factor=factor, scales=group[0].scales, distance=d,
                               bases=tuple(t.basis for t in group), per_cycle=iv,
                               zero_errors=any_zero, log_sigma=log_sigma(iv, zero_errors=all_zero)))
    return tuple(out)


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


def fit_stats(stats: Sequence[sinter.TaskStats]) -> FitReport:
    """All fits from one set of samples (summed per task, e.g. ``SampleStore(dir).stats()``)."""
    tasks = fit_tasks(stats)
    dists = fit_distances(tasks)
    groups: dict[tuple[str, float], list[DistanceFit]] = defaultdict(list)
    for p in dists:
        groups[(p.axis, p.factor)].append(p)
    lambdas = tuple(fit_lambda(g) for g in groups.values())
    lambdas = tuple(sorted(lambdas, key=lambda lf: (lf.axis != "joint", lf.axis, lf.factor)))
    notes = []
    if len({t.distance for t in tasks}) < 2:
        notes.append("a single distance was sampled: no Lambda can be fitted")
    nz = sum(t.zero_errors for t in tasks)
    if nz:
        notes.append(f"{nz} task(s) saw zero errors: their rate is the interval's upper end")
    return FitReport(tasks=tasks,
                     distances=tuple(sorted(dists, key=lambda p: (p.axis != "joint", p.axis, p.factor, p.distance))),
                     lambdas=lambdas, threshold=fit_threshold(lambdas), notes=tuple(notes))
