"""Planning for a spread of qubits: draw device instances, then the median and the worse tail of
their logical error per cycle and Lambda, with intervals (pure: the sampling is
:mod:`planner.jobs.spread`).

Two ways to draw an instance (a chip) from today's model, for every qubit and coupled pair of the
largest patch planned (a smaller patch is its corner, so one instance serves every distance):

- ``"table"``: resample the per-qubit values in force (the target's table, the component value
  for a qubit it does not list): each qubit takes the whole row of values (so its T1 and T2 stay
  a pair) of a qubit drawn at random, with replacement, from the qubits of its own role (data or
  measure); each pair takes the two-qubit error of a pair drawn at random;
- ``"spread"``: multiply each qubit's value in force by a log-normal factor exp(sigma z) of the
  field's ``[device.spread]`` sigma (median-preserving: half the qubits are better than the
  value). A probability is capped at its component's limit, and T2 at 2 T1.

Scale factors stay as they are: they multiply every drawn value like today's.

The figures across instances: the median, and the worse tenth of chips (the 90th percentile of
the logical error per cycle, the 10th of Lambda, which falls as errors rise). Their intervals
come from a bootstrap over instances in which each instance's own figure is also redrawn within
its sampling interval (log-normal), so both the finite number of instances and each instance's
finite shots widen them.

>>> import numpy as np
>>> ivs = [Interval(low=0.9 * v, best=v, high=1.1 * v) for v in (1.0, 2.0, 3.0, 4.0, 5.0)]
>>> s = percentile_interval(ivs, q=50, rng=np.random.default_rng(1))
>>> s.best, s.low < 3.0 < s.high
(3.0, True)
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np

from planner.circuits import Layout
from planner.config import MAX_PROBABILITY
from planner.errors import InputError
from planner.fits import CONFIDENCE, Z_SCORE, FitReport, Interval
from planner.noise import NoiseModel, PairNoise, QubitNoise, with_qubits

__all__ = ["DRAWS", "SpreadSummary", "draw_instances", "percentile_interval", "summarize_spread"]

DRAWS: tuple[str, ...] = ("table", "spread")
#: per-qubit fields drawn, and the largest value of each (probabilities: full mixing)
_QUBIT_FIELDS: tuple[str, ...] = ("gate_1q", "readout", "reset", "t1_us", "t2_us", "idle_excess",
                                  "idle_measure_excess")
_CAP: dict[str, float] = {"gate_1q": MAX_PROBABILITY["gate_1q"], "readout": MAX_PROBABILITY["readout"],
                          "reset": MAX_PROBABILITY["reset"], "idle_excess": MAX_PROBABILITY["idle"],
                          "idle_measure_excess": MAX_PROBABILITY["idle_measure"],
                          "gate_2q": MAX_PROBABILITY["gate_2q"], "t1_us": math.inf, "t2_us": math.inf}
#: the percentiles reported: the median, and the worse tenth of chips
MEDIAN, WORSE = 50.0, 90.0
BOOTSTRAP_DRAWS = 2000


# ---------------------------------------------------------------------------------------------
# drawing instances


def _in_force(model: NoiseModel, layout: Layout) -> tuple[list[dict[str, float]], list[float]]:
    """Each layout qubit's values in force and each pair's gate_2q (unscaled: the instance keeps
    the model's scale factors)."""
    qubits = [{f: model.qubit_value(f, q.coords) for f in _QUBIT_FIELDS} for q in layout.qubits]
    own = {p.coords: p.gate_2q for p in model.pairs}
    return qubits, [own.get(ends, model.gate_2q) for ends in layout.pairs]


def _resampled(values: list[dict[str, float]], pairs: list[float], roles: Sequence[str],
               rng: np.random.Generator) -> tuple[list[dict[str, float]], list[float]]:
    by_role: dict[str, list[int]] = {}
    for k, role in enumerate(roles):
        by_role.setdefault("data" if role == "data" else "measure", []).append(k)
    out = list(values)
    for members in by_role.values():
        picks = rng.choice(members, size=len(members), replace=True)
        for k, pick in zip(members, picks):
            out[k] = values[int(pick)]
    drawn = [pairs[int(i)] for i in rng.integers(0, len(pairs), size=len(pairs))] if pairs else []
    return out, drawn


def _scattered(values: list[dict[str, float]], pairs: list[float], sigmas: Mapping[str, float],
               rng: np.random.Generator) -> tuple[list[dict[str, float]], list[float]]:
    out = []
    for row in values:
        new = {f: _capped(f, v * math.exp(sigmas.get(f, 0.0) * rng.standard_normal())) for f, v in row.items()}
        new["t2_us"] = min(new["t2_us"], 2 * new["t1_us"])
        out.append(new)
    s2 = sigmas.get("gate_2q", 0.0)
    drawn = [_capped("gate_2q", p * math.exp(s2 * rng.standard_normal())) for p in pairs]
    return out, drawn


def _capped(field: str, value: float) -> float:
    return min(value, _CAP[field]) if math.isfinite(value) else value


def draw_instances(model: NoiseModel, layout: Layout, *, draw: str, count: int, seed: int,
                   sigmas: Mapping[str, float] | None = None) -> list[NoiseModel]:
    """``count`` device instances of ``model`` over ``layout``'s qubits and pairs (see the
    module doc for ``draw`` "table" or "spread"; ``sigmas``: field -> log-normal sigma).

    >>> from planner.circuits import qubit_layout
    >>> lay = qubit_layout(code="repetition", distance=3)
    >>> ms = draw_instances(NoiseModel.sd6(0.001), lay, draw="spread", count=2, seed=0, sigmas={"readout": 0.0})
    >>> [m.probability("readout", at=(1.0, 0.0)) for m in ms]
    [0.001, 0.001]
    """
    if draw not in DRAWS:
        raise InputError(f"{draw!r} is not a way to draw instances", field="draw", allowed=", ".join(DRAWS))
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise InputError(f"{count!r} is not allowed", field="instances", allowed="an integer >= 1")
    rng = np.random.default_rng(seed)
    values, pairs = _in_force(model, layout)
    roles = [q.role for q in layout.qubits]
    out = []
    for _ in range(count):
        if draw == "table":
            qv, pv = _resampled(values, pairs, roles, rng)
        else:
            qv, pv = _scattered(values, pairs, sigmas or {}, rng)
        qubits = [QubitNoise(coords=q.coords, **v) for q, v in zip(layout.qubits, qv)]
        pair_noise = [PairNoise(coords=ends, gate_2q=p) for ends, p in zip(layout.pairs, pv)]
        out.append(with_qubits(model, qubits, pair_noise))
    return out


# ---------------------------------------------------------------------------------------------
# figures across instances


def _log_sigma(iv: Interval) -> float:
    if iv.low <= 0 or iv.best <= 0:
        return 1.0  # an upper bound only (zero errors): a wide log-normal
    return max((math.log(iv.high) - math.log(iv.low)) / (2 * Z_SCORE), 1e-9)


def percentile_interval(values: Sequence[Interval], *, q: float, rng: np.random.Generator,
                        draws: int = BOOTSTRAP_DRAWS) -> Interval:
    """The ``q``-th percentile of ``values``' bests, with a :data:`CONFIDENCE` interval from a
    bootstrap over the values in which each is also redrawn log-normally within its own interval."""
    if not values:
        raise ValueError("no values")
    bests = np.array([iv.best if iv.best > 0 else iv.high for iv in values], dtype=float)
    sig = np.array([_log_sigma(iv) for iv in values])
    picks = rng.integers(0, len(values), size=(draws, len(values)))
    drawn = bests[picks] * np.exp(sig[picks] * rng.standard_normal(picks.shape))
    stats = np.percentile(drawn, q, axis=1)
    tail = (1 - CONFIDENCE) / 2 * 100
    low, high = np.percentile(stats, [tail, 100 - tail])
    best = float(np.percentile(bests, q))
    return Interval(low=min(float(low), best), best=best, high=max(float(high), best))


@dataclasses.dataclass(frozen=True, kw_only=True)
class SpreadSummary:
    """The figures across ``instances`` device instances: per distance the median and the 90th
    percentile of the logical error per cycle; the median and the 10th percentile of Lambda
    (both the worse tenth of chips); each instance's own figures."""

    draw: str
    instances: int
    seed: int
    sigmas: dict[str, float]
    distances: tuple[int, ...]
    eps_median: dict[int, Interval]
    eps_worse: dict[int, Interval]
    lambda_median: Interval | None
    lambda_worse: Interval | None
    per_instance: tuple[dict[str, Any], ...]
    #: the model as the target lists it (no draw), for comparison; empty when not sampled
    eps_listed: dict[int, Interval] = dataclasses.field(default_factory=dict)
    lambda_listed: Interval | None = None
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        def iv(x: Interval | None) -> Any:
            return x.to_json() if x is not None else None

        return {"draw": self.draw, "instances": self.instances, "seed": self.seed, "sigmas": self.sigmas,
                "confidence": CONFIDENCE,
                "logical_error_per_cycle": [{"d": d, "median": iv(self.eps_median[d]),
                                             "p90": iv(self.eps_worse[d])} for d in self.distances],
                "lambda": {"median": iv(self.lambda_median), "p10": iv(self.lambda_worse),
                           "as_listed": iv(self.lambda_listed)},
                "as_listed": [{"d": d, "logical_error_per_cycle": iv(x)} for d, x in sorted(self.eps_listed.items())],
                "per_instance": list(self.per_instance), "notes": list(self.notes)}


def _instance_rows(fits: FitReport, labels: Sequence[str]) -> tuple[dict[str, Any], ...]:
    rows = []
    for label in labels:
        lam = next((lf.suppression for lf in fits.lambdas if lf.axis == label), None)
        eps = {str(p.distance): p.per_cycle.to_json() for p in fits.distances if p.axis == label}
        rows.append({"instance": label, "logical_error_per_cycle": eps,
                     "lambda": lam.to_json() if lam is not None else None})
    return tuple(rows)


def _notes(fits: FitReport, labels: Sequence[str]) -> tuple[str, ...]:
    notes = []
    if len(labels) < 10:
        notes.append(f"{len(labels)} instances: the 90th percentile rests on few chips (use --instances 20 or more)")
    if any(p.zero_errors for p in fits.distances if p.axis in labels):
        notes.append("some instance saw zero errors at some distance: its rate enters at its upper bound")
    return tuple(notes)


def _lambdas(fits: FitReport, labels: Sequence[str]) -> list[Interval]:
    return [lf.suppression for lf in fits.lambdas if lf.axis in labels and lf.suppression is not None]


def _across(values: Sequence[Interval], rng: np.random.Generator, *, worse: float) -> tuple[Interval | None, ...]:
    """(median, the ``worse`` percentile) of ``values``, (None, None) without values."""
    if not values:
        return None, None
    return percentile_interval(values, q=MEDIAN, rng=rng), percentile_interval(values, q=worse, rng=rng)


def summarize_spread(fits: FitReport, *, labels: Sequence[str], draw: str, seed: int,
                     sigmas: Mapping[str, float], listed: str | None = None) -> SpreadSummary:
    """The figures across the instances whose scale axis is one of ``labels`` (one per instance);
    ``listed``: the scale axis of the model as listed (no draw), reported beside them."""
    rng = np.random.default_rng(seed)
    mine = [p for p in fits.distances if p.axis in labels]
    distances = tuple(sorted({p.distance for p in mine}))
    eps = {d: _across([p.per_cycle for p in mine if p.distance == d], rng, worse=WORSE) for d in distances}
    lam = _across(_lambdas(fits, labels), rng, worse=100 - WORSE)
    ref = next((lf.suppression for lf in fits.lambdas if lf.axis == listed), None)
    return SpreadSummary(
        draw=draw, instances=len(labels), seed=seed, sigmas=dict(sigmas), distances=distances,
        eps_median={d: v[0] for d, v in eps.items()}, eps_worse={d: v[1] for d, v in eps.items()},
        lambda_median=lam[0], lambda_worse=lam[1],
        per_instance=_instance_rows(fits, labels), notes=_notes(fits, labels),
        eps_listed={p.distance: p.per_cycle for p in fits.distances if p.axis == listed}, lambda_listed=ref)
