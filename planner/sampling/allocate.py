"""The shot allocator of precision-targeted sampling: a pure function, no sampling, no fitting.

The model it works on: answer ``a`` has variance ``V_a(n) = sum_t S[a, t] / n_t`` when task
``t`` has ``n_t`` shots (the delta method: Var(ln eps_t) ~ 1 / errors_t, propagated through the
fits; see :mod:`planner.planning.precision`). Every answer must reach ``V_a <= target_a``. Each
shot of task ``t`` costs ``cost_per_shot[t]`` CPU seconds, and a task never goes beyond
``max_shots[t]`` (its cap from the CPU-time and budget limits).

The allocation is greedy: first every task that enters some answer gets ``min_errors`` expected
errors (so no task an answer depends on is starved); then, repeatedly, the task that removes the
most unmet variance per CPU second grows by a step (a quarter of its shots, at least a small
number), until every answer is met or every task that could still help is at its cap.

>>> a = allocate(shots=[100, 100], rates=[0.1, 0.1], cost_per_shot=[1e-6, 1e-3],
...              sensitivity=[[1.0, 1.0]], target_variance=[0.01], max_shots=[10**9, 10**9],
...              min_errors=1)
>>> a.met, a.extra_shots[0] > 10 * a.extra_shots[1]
(True, True)
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence

import numpy as np

#: growth of a task per greedy step (fraction of its current shots): small enough not to
#: overshoot much, large enough that a plan takes a few thousand steps at most
STEP_FRACTION = 0.25
#: smallest step, in shots (tiny tasks would otherwise crawl)
MIN_STEP_SHOTS = 64
#: a variance this close to its target counts as met (floating point slack)
MET_SLACK = 1e-9
#: hard stop on greedy steps (a plan never needs this many)
MAX_STEPS = 200_000
#: an answer the caps keep from its target is aimed at this multiple of its smallest variance
BEST_EFFORT = 1.1
#: no task is ever planned beyond this many shots (keeps the arithmetic finite)
MAX_SHOTS = 1e15


@dataclasses.dataclass(frozen=True)
class Allocation:
    """Extra shots per task (same order as the inputs) and what they are projected to reach.

    ``capped``: tasks whose cap stops them while an answer they enter is still unmet (or which
    cannot even reach their minimum); ``unmet``: answers the plan cannot reach within the caps.
    ``cpu_seconds``: the plan's cost at the given costs per shot.
    """

    extra_shots: tuple[int, ...]
    projected_variance: tuple[float, ...]
    met: bool
    capped: tuple[int, ...]
    unmet: tuple[int, ...]
    starved: tuple[int, ...]
    cpu_seconds: float

    @property
    def total_shots(self) -> int:
        return sum(self.extra_shots)


def _array(x: Sequence[float] | np.ndarray, name: str, n: int | None = None) -> np.ndarray:
    a = np.asarray(x, dtype=float)
    if a.ndim != 1 or (n is not None and a.shape[0] != n):
        raise ValueError(f"{name} must be a vector of length {n}, got shape {a.shape}")
    if not np.all(np.isfinite(a)) or np.any(a < 0):
        raise ValueError(f"{name} must be finite and >= 0")
    return a


@dataclasses.dataclass(frozen=True)
class _Problem:
    """The allocator's inputs, checked and as float arrays (T tasks, A answers)."""

    n0: np.ndarray  # (T,) shots now
    rate: np.ndarray  # (T,)
    cost: np.ndarray  # (T,)
    cap: np.ndarray  # (T,)
    sens: np.ndarray  # (A, T)
    target: np.ndarray  # (A,)

    def variances(self, n: np.ndarray) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            per = np.where(self.sens > 0, self.sens / n, 0.0)
        return per.sum(axis=1)


def _problem(shots: Sequence[int] | np.ndarray, rates: Sequence[float] | np.ndarray,
             cost_per_shot: Sequence[float] | np.ndarray, sensitivity: Sequence[Sequence[float]] | np.ndarray,
             target_variance: Sequence[float] | np.ndarray, max_shots: Sequence[float] | np.ndarray) -> _Problem:
    n0 = _array(shots, "shots")
    t_count = n0.shape[0]
    rate = _array(rates, "rates", t_count)
    cost = _array(cost_per_shot, "cost_per_shot", t_count)
    cap = np.asarray(max_shots, dtype=float)
    if cap.shape != (t_count,) or np.any(np.isnan(cap)) or np.any(cap < 0):
        raise ValueError(f"max_shots must be a vector of length {t_count} of values >= 0")
    sens = np.asarray(sensitivity, dtype=float).reshape(-1, t_count)
    if not np.all(np.isfinite(sens)) or np.any(sens < 0):
        raise ValueError("sensitivity must be finite and >= 0")
    target = _array(target_variance, "target_variance", sens.shape[0])
    if np.any(target <= 0):
        raise ValueError("target_variance must be > 0")
    if np.any(cost <= 0):
        raise ValueError("cost_per_shot must be > 0")
    return _Problem(n0=n0, rate=rate, cost=cost, cap=cap, sens=sens, target=target)


def _minimum(p: _Problem, used: np.ndarray, min_errors: float) -> tuple[np.ndarray, list[int]]:
    """Every task an answer depends on at ``min_errors`` expected errors (or its cap: then it is
    starved); a task with no shots at all gets one step (its variance would be infinite)."""
    n = p.n0.copy()
    starved: list[int] = []
    for t in np.flatnonzero(used):
        want = min_errors / p.rate[t] if p.rate[t] > 0 else math.inf
        if want > p.cap[t] and n[t] < want:
            starved.append(int(t))
        n[t] = max(n[t], min(want, p.cap[t]))
    return np.where(used & (n <= 0), np.minimum(MIN_STEP_SHOTS, p.cap), n), starved


def _greedy(p: _Problem, n: np.ndarray, used: np.ndarray, goal: np.ndarray, cap: np.ndarray) -> np.ndarray:
    """Grow, step by step, the task that removes the most unmet variance per CPU second."""
    for _ in range(MAX_STEPS):
        excess = p.variances(n) - goal * (1 + MET_SLACK)
        unmet = excess > 0
        if not unmet.any():
            break
        step = np.minimum(np.maximum(STEP_FRACTION * n, MIN_STEP_SHOTS), cap - n)
        ok = (step > 0) & used
        if not ok.any():
            break
        with np.errstate(divide="ignore", invalid="ignore"):
            drop = p.sens[unmet] * (1 / n - 1 / (n + step))  # (unmet answers, T)
        drop = np.where(np.isfinite(drop), drop, 0.0)
        # count only what is still missing of each answer, normalised by its target
        gain = np.minimum(drop, excess[unmet][:, None]) / goal[unmet][:, None]
        merit = np.where(ok, gain.sum(axis=0) / (p.cost * np.where(step > 0, step, 1.0)), 0.0)
        best = int(np.argmax(merit))
        if merit[best] <= 0:
            break
        n[best] += step[best]
    return n


def allocate(*, shots: Sequence[int] | np.ndarray, rates: Sequence[float] | np.ndarray,
             cost_per_shot: Sequence[float] | np.ndarray,
             sensitivity: Sequence[Sequence[float]] | np.ndarray,
             target_variance: Sequence[float] | np.ndarray,
             max_shots: Sequence[float] | np.ndarray, min_errors: float = 20.0) -> Allocation:
    """Plan extra shots per task so every answer's variance reaches its target at least cost.

    ``shots`` (T,): shots each task has; ``rates`` (T,): logical errors per shot (estimated; used
    for the minimum of ``min_errors`` errors); ``cost_per_shot`` (T,): CPU seconds per shot;
    ``sensitivity`` (A, T): ``S[a, t]`` with ``V_a = sum_t S[a, t] / n_t``; ``target_variance``
    (A,); ``max_shots`` (T,): the most shots a task may reach (inf for no cap).
    """
    p = _problem(shots, rates, cost_per_shot, sensitivity, target_variance, max_shots)
    used = np.any(p.sens > 0, axis=0)
    n, starved = _minimum(p, used, min_errors)
    # an answer whose variance stays above target even with every task at its cap cannot be met:
    # aim it at 1.1x its floor instead (as precise as the caps allow, with finite shots) and
    # report it unmet
    with np.errstate(divide="ignore"):
        floor = np.where(p.sens > 0, p.sens / np.maximum(p.cap, 1e-300), 0.0).sum(axis=1)
    goal = np.maximum(p.target, BEST_EFFORT * floor)
    cap = np.minimum(p.cap, MAX_SHOTS)
    n = _greedy(p, n, used, goal, cap)
    return _result(p, n, cap, starved)


def _result(p: _Problem, n: np.ndarray, cap: np.ndarray, starved: list[int]) -> Allocation:
    v = p.variances(n)
    unmet_idx = np.flatnonzero(v > p.target * (1 + MET_SLACK))
    at_cap = n >= cap * (1 - 1e-12)
    wanted = np.any(p.sens[unmet_idx] > 0, axis=0) if unmet_idx.size else np.zeros(n.shape[0], bool)
    capped = sorted(set(np.flatnonzero(at_cap & wanted).tolist()) | set(starved))
    room = np.where(np.isfinite(cap), np.maximum(np.floor(cap - p.n0), 0.0), np.inf)
    extra = np.minimum(np.ceil(np.maximum(n - p.n0, 0.0) - 1e-9), room).astype(np.int64)
    return Allocation(extra_shots=tuple(int(x) for x in extra),
                      projected_variance=tuple(float(x) for x in v),
                      met=not unmet_idx.size, capped=tuple(int(t) for t in capped),
                      unmet=tuple(int(a) for a in unmet_idx), starved=tuple(starved),
                      cpu_seconds=float(np.sum(extra * p.cost)))
