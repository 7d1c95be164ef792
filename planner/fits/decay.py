"""The logical error per cycle from the decay of the logical fidelity over round counts, and
the per-(scale point, distance) rates with the bases combined.

A memory experiment of r rounds has fidelity ``F(r) = 1 - 2 P_L(r)``. With a per-cycle rate eps
and boundary effects (the first and last rounds differ from the bulk) folded into a constant,
``F(r) = C (1 - 2 eps)^r``; so ``ln F`` is a line in r with slope ``ln(1 - 2 eps)`` and intercept
``ln C``, fitted here over the round counts of one (scale point, distance, basis). A single round
count gives back ``eps = (1 - F^(1/r)) / 2`` (C = 1 assumed: :func:`per_cycle_rate`), which is
what a sweep at r = d alone measured; it is kept as the *single-round* estimate.

The interval (the delta method, stated once here): each round count's ``ln F`` has variance
``4 P (1 - P) / (n F^2)`` (binomial, to first order); a weighted least-squares line through the
round counts (:func:`~planner.fits.suppression.weighted_line`, widened by sqrt(chi2/dof) when
more than two round counts scatter beyond their intervals) gives the slope and intercept with
standard errors; the :data:`~planner.fits.rates.CONFIDENCE` interval of each, mapped through
``eps = (1 - e^slope) / 2`` and ``C = e^intercept``.

What is left out of the line, and the fall-backs (the estimate then is the single-round one at
the largest usable round count, labelled so):

- a round count with zero errors (its rate is only an upper bound);
- a saturated round count: ``F`` within :data:`~planner.fits.rates.Z_SCORE` standard errors of
  0 (P near 1/2 carries no information on eps);
- a line that does not fall (fidelity not decaying within the noise between the round counts).

When every round count saw zero errors the estimate is the upper end of the single-round
interval at the largest round count, flagged ``zero_errors`` as the task rates are.

This module is the one implementation: the fits (:func:`fit_decay`), the bootstrap replicas
(:mod:`planner.planning.uncertainty`) and the delta-method Jacobians
(:mod:`planner.planning.precision`) all call :func:`decay_rate` / :func:`distance_rate`.

>>> f = fit_decay(rounds=[5, 15], shots=[10**6, 10**6], errors=[20_000, 55_000])
>>> f.method, round(f.per_cycle.best, 5), round(f.offset.best, 3)
('decay', 0.00377, 0.997)
"""

from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from planner.errors import InputError
from planner.fits.rates import (
    Z_SCORE,
    DistanceFit,
    Interval,
    TaskFit,
    log_sigma,
    per_cycle_interval,
    per_cycle_rate,
    zero_error_upper,
)
from planner.fits.suppression import LineFit, weighted_line

#: how the bases combine at one (point, distance): what the goal refers to (``[goal] basis``)
BASIS_COMBINATIONS = ("mean", "worse")
DECAY = "decay"
SINGLE_ROUND = "single_round"


@dataclasses.dataclass(frozen=True, kw_only=True)
class DecayFit:
    """Logical error per cycle of one (point, distance, basis) over its round counts.

    ``method`` is :data:`DECAY` (the line over two or more round counts) or :data:`SINGLE_ROUND`
    (one round count: ``note`` says why); ``offset`` is C with its interval (None for a
    single-round estimate); ``single_round`` is the estimate from the smallest round count
    alone (r = d by default), as a sweep at one round count measured it.
    """

    basis: str
    rounds: tuple[int, ...]
    per_cycle: Interval
    offset: Interval | None
    single_round: Interval
    method: str
    zero_errors: bool
    chi2_per_dof: float | None = None
    note: str = ""

    def to_json(self) -> dict[str, Any]:
        return {"basis": self.basis, "rounds": list(self.rounds), "method": self.method,
                "logical_error_per_cycle": self.per_cycle.to_json(),
                "boundary_offset": self.offset.to_json() if self.offset else None,
                "per_cycle_single_round": self.single_round.to_json(), "zero_errors": self.zero_errors,
                "chi2_per_dof": self.chi2_per_dof, "note": self.note}


@dataclasses.dataclass(frozen=True)
class _Core:
    """The estimate before intervals: ``line`` (None: single round count ``index``)."""

    eps: float
    line: LineFit | None
    index: int
    note: str


def shot_errors(*, shots: Any, errors: Any) -> np.ndarray:
    """The shot error rate per task, a zero-error task at its interval's upper end (the rate
    every fit uses for it).

    >>> shot_errors(shots=[100, 1000], errors=[5, 0]).round(5).tolist()
    [0.05, 0.00192]
    """
    n, k = np.asarray(shots, float), np.asarray(errors, float)
    upper = np.array([zero_error_upper(int(x)) for x in np.atleast_1d(n)]).reshape(n.shape)
    return np.where(k > 0, k / n, upper)


def _core(rounds: np.ndarray, p: np.ndarray, shots: np.ndarray, zero: np.ndarray) -> _Core:
    fid = 1 - 2 * p
    sd = 2 * np.sqrt(np.clip(p * (1 - p), 0.0, None) / shots)
    usable = ~zero & (fid > Z_SCORE * sd)
    note = ""
    if len(rounds) < 2:
        note = "one round count sampled"
    elif len(set(rounds[usable].tolist())) >= 2:
        line = weighted_line(rounds[usable], np.log(fid[usable]), sd[usable] / fid[usable])
        if line.slope < 0:
            return _Core(eps=float(-math.expm1(line.slope) / 2), line=line, index=-1, note="")
        note = "fidelity did not fall between the round counts (within the noise)"
    else:
        why = [w for w, bad in (("zero errors", zero), ("a rate near 1/2", ~zero & ~usable)) if bad.any()]
        note = f"round counts with {' or '.join(why)} left out: fewer than two left"
    return _Core(eps=float(per_cycle_rate(p[index := _single_index(rounds, usable, zero)],
                                          rounds=rounds[index])), line=None, index=index, note=note)


def _single_index(rounds: np.ndarray, usable: np.ndarray, zero: np.ndarray) -> int:
    """The round count of the single-round estimate: the largest usable one (least affected by
    the boundaries); else the smallest with errors (the least saturated); all zero: the largest
    (the tightest upper bound)."""
    if usable.any():
        pick = np.flatnonzero(usable)
        return int(pick[np.argmax(rounds[pick])])
    if (~zero).any():
        pick = np.flatnonzero(~zero)
        return int(pick[np.argmin(rounds[pick])])
    return int(np.argmax(rounds))


def _arrays(rounds: Any, shot_error: Any, shots: Any, zero_errors: Any) -> tuple[np.ndarray, ...]:
    r = np.asarray(rounds, float)
    p = np.minimum(np.asarray(shot_error, float), 0.5)
    n = np.asarray(shots, float)
    z = np.zeros(r.shape, bool) if zero_errors is None else np.asarray(zero_errors, bool)
    if not (r.shape == p.shape == n.shape == z.shape) or r.ndim != 1 or r.size == 0:
        raise InputError("rounds, shot errors, shots must be equal-length non-empty lists", field="rounds")
    return r, p, n, z


def decay_rate(*, rounds: Any, shot_error: Any, shots: Any, zero_errors: Any = None) -> float:
    """The best per-cycle rate of one (point, distance, basis) from its round counts: the
    fidelity-decay slope, or the single-round fall-back (see the module text). ``shot_error``
    holds a zero-error task's upper end (:func:`shot_errors`), ``zero_errors`` marks those.

    >>> round(decay_rate(rounds=[3, 9], shot_error=[0.02, 0.05], shots=[10**5] * 2), 6)
    0.005349
    >>> round(decay_rate(rounds=[3], shot_error=[0.02], shots=[10**5]), 6) == round(per_cycle_rate(0.02, rounds=3), 6)
    True
    """
    return _core(*_arrays(rounds, shot_error, shots, zero_errors)).eps


def fit_decay(*, rounds: Sequence[int], shots: Sequence[int], errors: Sequence[int],
              basis: str = "z") -> DecayFit:
    """The per-cycle rate and the boundary offset C, with intervals (delta method), of one
    (point, distance, basis) from its tasks at several round counts (see the module text)."""
    k = np.asarray(errors, float)
    r, p, n, z = _arrays(rounds, shot_errors(shots=shots, errors=errors), shots, k == 0)
    order = np.argsort(r)
    r, p, n, z, k = r[order], p[order], n[order], z[order], k[order]
    core = _core(r, p, n, z)
    _, single = per_cycle_interval(shots=int(n[0]), errors=int(k[0]), rounds=int(r[0]))
    if z[0]:
        single = dataclasses.replace(single, best=single.high)
    common = dict(basis=basis, rounds=tuple(int(x) for x in r), single_round=single)
    if core.line is not None:
        line = core.line
        b_lo, b_hi = line.slope - Z_SCORE * line.slope_se, line.slope + Z_SCORE * line.slope_se
        eps = Interval(low=max(-math.expm1(b_hi) / 2, 0.0), best=core.eps, high=min(-math.expm1(b_lo) / 2, 0.5))
        c = Interval(low=math.exp(line.intercept - Z_SCORE * line.intercept_se), best=math.exp(line.intercept),
                     high=math.exp(line.intercept + Z_SCORE * line.intercept_se))
        return DecayFit(**common, per_cycle=eps, offset=c, method=DECAY, zero_errors=False,
                        chi2_per_dof=line.chi2_per_dof)
    i = core.index
    _, cyc = per_cycle_interval(shots=int(n[i]), errors=int(k[i]), rounds=int(r[i]))
    if z[i]:
        cyc = dataclasses.replace(cyc, best=cyc.high)
    return DecayFit(**common, per_cycle=cyc, offset=None, method=SINGLE_ROUND, zero_errors=bool(z.all()),
                    note=core.note + (f" (single-round estimate at r={int(r[i])})" if len(r) > 1 else ""))


# ---------------------------------------------------------------------------------------------
# bases combined


def check_combination(how: str) -> str:
    if how not in BASIS_COMBINATIONS:
        raise InputError(f"{how!r} is not a basis combination", field="goal.basis",
                         allowed=", ".join(BASIS_COMBINATIONS))
    return how


def combine_values(values: Sequence[float], how: str = "mean") -> float:
    """The bases' rates combined: their mean, or the larger (``"worse"``).

    >>> combine_values([1.0, 3.0]), combine_values([1.0, 3.0], "worse")
    (2.0, 3.0)
    """
    return max(values) if how == "worse" else sum(values) / len(values)


def combine_intervals(intervals: Sequence[Interval], how: str = "mean") -> Interval:
    """``"mean"``: the mean of the bests, each side widened by the root-sum-square of the bases'
    half-widths on that side over n (independent estimates); ``"worse"``: the interval of the
    basis with the larger best.

    >>> combine_intervals([Interval(low=1.0, best=2.0, high=3.0), Interval(low=3.0, best=4.0, high=5.0)])
    Interval(best=3.0, low=2.2928932188134525, high=3.7071067811865475)
    """
    if how == "worse":
        return max(intervals, key=lambda iv: iv.best)
    n = len(intervals)
    best = sum(iv.best for iv in intervals) / n
    lo = math.sqrt(sum((iv.best - iv.low) ** 2 for iv in intervals)) / n
    hi = math.sqrt(sum((iv.high - iv.best) ** 2 for iv in intervals)) / n
    return Interval(low=max(best - lo, 0.0), best=best, high=best + hi)


def combine_bases(group: Sequence[TaskFit], how: str = "mean") -> tuple[Interval, bool]:
    """One task per basis (a single round count): their per-cycle intervals combined (a
    zero-error basis at its upper end), and whether every basis saw zero errors."""
    ivs = [dataclasses.replace(t.per_cycle, best=t.per_cycle.high) if t.zero_errors else t.per_cycle
           for t in group]
    return combine_intervals(ivs, how), all(t.zero_errors for t in group)


def distance_rate(bases: Sequence[Mapping[str, Any]], how: str = "mean") -> float:
    """One (point, distance)'s rate: :func:`decay_rate` per basis (each a mapping of its keyword
    arguments), combined by ``how``."""
    return combine_values([decay_rate(**b) for b in bases], how)


def basis_groups(tasks: Sequence[TaskFit]) -> dict[tuple[str, float, int], list[list[int]]]:
    """The task indices of each (axis, factor, distance): one list per basis (sorted by basis),
    the input of :func:`distance_rates`."""
    members: dict[tuple[str, float, int], dict[str, list[int]]] = defaultdict(lambda: defaultdict(list))
    for i, t in enumerate(tasks):
        members[(t.axis, t.factor, t.distance)][t.basis].append(i)
    return {k: [v for _, v in sorted(by_basis.items())] for k, by_basis in members.items()}


def distance_rates(groups: Mapping[Any, Sequence[Any]], *, rounds: Any, shot_error: Any, shots: Any,
                   zero_errors: Any, how: str = "mean") -> dict[Any, float]:
    """:func:`distance_rate` of many (point, distance) groups from flat per-task arrays:
    ``groups[key]`` lists one index array per basis (the tasks of that basis's round counts).

    >>> distance_rates({"a": [[0, 1]]}, rounds=[3, 9], shot_error=[0.02, 0.05], shots=[10**5] * 2,
    ...                zero_errors=[False, False])["a"] == decay_rate(rounds=[3, 9], shot_error=[0.02, 0.05], shots=[10**5] * 2)
    True
    """
    r, p, n, z = (np.asarray(x) for x in (rounds, shot_error, shots, zero_errors))
    return {key: distance_rate([dict(rounds=r[ix], shot_error=p[ix], shots=n[ix], zero_errors=z[ix])
                                for ix in (np.asarray(b, int) for b in bases)], how)
            for key, bases in groups.items()}


def fit_distances(tasks: Sequence[TaskFit], *, combine: str = "mean") -> tuple[DistanceFit, ...]:
    """Per (point, distance): each basis's decay fit over its round counts, combined by
    ``combine`` (``"mean"`` or ``"worse"``, what the goal refers to)."""
    check_combination(combine)
    groups: dict[tuple[str, float, int], dict[str, list[TaskFit]]] = defaultdict(lambda: defaultdict(list))
    for t in tasks:
        groups[(t.axis, t.factor, t.distance)][t.basis].append(t)
    out = []
    for (axis, factor, d), by_basis in groups.items():
        fits = tuple(fit_decay(rounds=[t.rounds for t in g], shots=[t.shots for t in g],
                               errors=[t.errors for t in g], basis=b) for b, g in sorted(by_basis.items()))
        iv = combine_intervals([f.per_cycle for f in fits], combine)
        single = combine_intervals([f.single_round for f in fits], combine)
        all_zero = all(f.zero_errors for f in fits)
        any_zero = any(f.zero_errors for f in fits)
        first = next(iter(by_basis.values()))[0]
        out.append(DistanceFit(axis=axis, factor=factor, scales=first.scales, distance=d,
                               bases=tuple(f.basis for f in fits), per_cycle=iv, zero_errors=any_zero,
                               log_sigma=log_sigma(iv, zero_errors=all_zero), per_basis=fits,
                               per_cycle_single_round=single, combine=combine))
    return tuple(out)
