"""Rates: the interval type, the logical error per cycle of each task, and the type of a
(scale point, distance) rate (computed by :mod:`planner.fits.decay`; see :mod:`planner.fits`
for how things are combined).

>>> round(LIKELIHOOD_FACTOR, 3)
6.826
"""

from __future__ import annotations

import dataclasses
import math
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
    """Logical error per cycle at one (scale point, distance), bases combined by ``combine``
    (``"mean"`` or ``"worse"``: what the goal refers to).

    ``per_cycle`` comes from the fidelity decay over the round counts where two or more were
    sampled (:mod:`planner.fits.decay`); ``per_basis`` holds each basis's fit (with its
    boundary offset C); ``per_cycle_single_round`` is the estimate from the smallest round count
    alone (r = d by default), combined the same way.
    """

    axis: str
    factor: float
    scales: dict[str, float]
    distance: int
    bases: tuple[str, ...]
    per_cycle: Interval
    zero_errors: bool
    #: log-space sigma used as this point's weight in the Lambda fit
    log_sigma: float
    #: each basis's fit (a :class:`planner.fits.decay.DecayFit`), sorted by basis
    per_basis: tuple[Any, ...] = ()
    per_cycle_single_round: Interval | None = None
    combine: str = "mean"

    @property
    def rounds(self) -> tuple[int, ...]:
        """The round counts sampled (the union over the bases)."""
        return tuple(sorted({r for f in self.per_basis for r in f.rounds}))

    @property
    def method(self) -> str:
        """``"decay"`` when every basis's rate comes from the decay fit, else ``"single_round"``."""
        if self.per_basis and all(f.method == "decay" for f in self.per_basis):
            return "decay"
        return "single_round"

    def basis_fit(self, basis: str) -> Any:
        return next((f for f in self.per_basis if f.basis == basis), None)

    def to_json(self) -> dict[str, Any]:
        single = self.per_cycle_single_round
        return {"axis": self.axis, "factor": self.factor, "d": self.distance,
                "bases": list(self.bases), "zero_errors": self.zero_errors,
                "rounds": list(self.rounds), "method": self.method, "combine": self.combine,
                "logical_error_per_cycle": self.per_cycle.to_json(),
                "per_cycle_single_round": single.to_json() if single is not None else None,
                "per_basis": {f.basis: f.to_json() for f in self.per_basis}}



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
    """Per-task fits, tasks with no kept shots skipped, sorted by (axis, factor, d, basis, rounds)."""
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
    out.sort(key=lambda t: (t.axis != "joint", t.axis, t.factor, t.distance, t.basis, t.rounds))
    return tuple(out)


def log_sigma(iv: Interval, *, zero_errors: bool) -> float:
    """Log-space sigma of a rate from its interval (the weight of a point in the Lambda fit)."""
    if zero_errors or iv.low <= 0 or iv.best <= 0:
        return ZERO_ERROR_LOG_SIGMA
    return max((math.log(iv.high) - math.log(iv.low)) / (2 * Z_SCORE), 1e-6)
