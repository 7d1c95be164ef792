"""Checking the answers on the simulator, beyond the fit: the operating points and distances to
sample, what that costs, and the comparison of what was sampled with the prediction (the
sampling is :mod:`planner.jobs.verify`).

The operating points are the joint-factor answer and the cheapest mix. They are sampled above
the largest fitted distance, at d_max + 2 and d_max + 4 (:func:`verify_distances`), where the
answers extrapolate and where the fit has no say, and at the goal distance itself when its
estimated CPU time fits (:func:`task_shots`, :class:`CpuEstimate`). Each distance is sampled at
two round counts, r = d and 3d (:data:`ROUND_MULTIPLES`), and the per-cycle rate is the fits'
(:func:`planner.fits.fit_stats`), which takes it from the decay between round counts.

A prediction "holds" where the two :data:`~planner.fits.CONFIDENCE` intervals overlap; it
"covers" a sample when the sampled best lies inside the predicted interval. A prediction that
does not cover its sample flags the answer: :attr:`Verification.flagged` and
:attr:`Verification.widen_factor`, the factor by which the predicted interval (its half-widths
in log space about the best) must widen to cover every sampled value.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from typing import Any

import numpy as np
import sinter

from planner.config import COMPONENTS
from planner.errors import InputError
from planner.fits import CONFIDENCE, FitReport, Interval, fit_stats

#: distances sampled above the largest fitted one, as steps of d
BEYOND_STEPS = (2, 4)
#: round counts sampled at each verify distance, as multiples of d (a per-cycle rate free of the
#: time boundaries needs two)
ROUND_MULTIPLES = (1, 3)


@dataclasses.dataclass(frozen=True, kw_only=True)
class OperatingPoint:
    """A proposed operating point: ``label`` (its axis in the verify samples), the scale on
    each component's error, and the joint factor (1 for a mix)."""

    label: str
    scales: dict[str, float]
    factor: float


@dataclasses.dataclass(frozen=True, kw_only=True)
class VerifyRow:
    """Predicted vs sampled at one (operating point, distance) or, with ``distance=None``, Lambda."""

    label: str
    quantity: str  # "logical_error_per_cycle" or "suppression_factor"
    distance: int | None
    predicted: Interval
    sampled: Interval | None
    zero_errors: bool = False

    @property
    def holds(self) -> bool | None:
        return None if self.sampled is None else self.predicted.overlaps(self.sampled)

    @property
    def widen(self) -> float | None:
        """How much the predicted interval must widen (its log half-width on the sample's side,
        about the best) to cover the sampled best: 1 when it covers it; None when not judged (not
        sampled, or zero errors: the sample is only a bound).

        >>> iv = Interval(low=1.0, best=2.0, high=4.0)
        >>> VerifyRow(label="p", quantity="q", distance=9, predicted=iv, sampled=Interval(low=7, best=8.0, high=9)).widen
        2.0
        """
        return widen_factor(self.predicted, self.sampled) if self.sampled is not None and not self.zero_errors else None

    @property
    def covered(self) -> bool | None:
        """Whether the sampled best lies inside the predicted interval (None: not judged)."""
        w = self.widen
        return None if w is None else w <= 1.0

    def to_json(self) -> dict[str, Any]:
        return {"label": self.label, "quantity": self.quantity, "d": self.distance,
                "predicted": self.predicted.to_json(),
                "sampled": self.sampled.to_json() if self.sampled else None,
                "zero_errors": self.zero_errors, "holds": self.holds, "covered": self.covered,
                "widen": self.widen}


def widen_factor(predicted: Interval, sampled: Interval) -> float:
    """The factor by which ``predicted``'s half-width in log space, on the side of the sampled
    best, must grow for the interval to hold that best (1 when it does; inf when the predicted
    interval has no width on that side).

    >>> p = Interval(low=0.5, best=1.0, high=2.0)
    >>> widen_factor(p, Interval(low=1, best=1.5, high=2)), widen_factor(p, Interval(low=0.1, best=0.25, high=0.3))
    (1.0, 2.0)
    """
    b, s = predicted.best, sampled.best
    if predicted.low <= s <= predicted.high:
        return 1.0
    if not (b > 0 and s > 0):
        return math.inf
    edge = predicted.high if s > b else predicted.low
    room = abs(math.log(edge / b)) if edge > 0 else 0.0
    return abs(math.log(s / b)) / room if room > 0 else math.inf


@dataclasses.dataclass(frozen=True, kw_only=True)
class CpuEstimate:
    """The CPU time one verify distance is expected to take, made before it is sampled: shots
    to the stopping rule at the predicted rates, times the cost per shot (``seconds_per_detector``
    times each circuit's detectors). ``sampled``: whether it was sampled (False: over the
    ``--max-cpu`` allowance, or not asked for); ``why``: what was decided and why."""

    distance: int
    tasks: int
    shots: int
    seconds: float
    seconds_per_detector: float
    sampled: bool
    why: str = ""

    def to_json(self) -> dict[str, Any]:
        return dataclasses.asdict(self)

    @classmethod
    def from_json(cls, doc: Any) -> CpuEstimate:
        return cls(distance=int(doc["distance"]), tasks=int(doc["tasks"]), shots=int(doc["shots"]),
                   seconds=float(doc["seconds"]), seconds_per_detector=float(doc["seconds_per_detector"]),
                   sampled=bool(doc["sampled"]), why=str(doc.get("why", "")))


def task_shots(*, eps: float, rounds: int, max_errors: int, max_shots: int) -> int:
    """Shots a task takes to its stopping rule when its per-cycle rate is ``eps``: ``max_errors``
    over the shot error rate after ``rounds`` cycles, at most ``max_shots``.

    >>> task_shots(eps=1e-6, rounds=21, max_errors=100, max_shots=10**9)
    4762001
    >>> task_shots(eps=1e-3, rounds=9, max_errors=1000, max_shots=10**5)
    100000
    """
    p = (1 - (1 - 2 * eps) ** rounds) / 2 if eps > 0 else 0.0
    if not p > 0:
        return int(max_shots)
    return int(min(max_shots, math.ceil(max_errors / p)))


@dataclasses.dataclass(frozen=True, kw_only=True)
class Verification:
    """Predicted against sampled logical error per cycle at the proposed operating points and
    distances; ``holds`` is False when a sample falls outside the prediction."""

    points: tuple[OperatingPoint, ...]
    distances: tuple[int, ...]
    rows: tuple[VerifyRow, ...]
    note: str = ""
    #: the largest distance the answers were fitted on, and the goal distance they answer for
    fitted_max: int | None = None
    goal_distance: int | None = None
    #: the CPU estimates made before sampling, one per distance (the goal's: sampled or skipped)
    cpu: tuple[CpuEstimate, ...] = ()

    @property
    def holds(self) -> bool:
        return all(r.holds is not False for r in self.rows)

    @property
    def flagged(self) -> bool:
        """A sampled value fell outside its predicted interval: the answers' intervals are too
        narrow there (by :attr:`widen_factor`)."""
        return any(r.covered is False for r in self.rows)

    @property
    def widen_factor(self) -> float:
        """The factor by which the predicted intervals must widen to cover every sampled value
        (1 when they do)."""
        return max([1.0, *(r.widen for r in self.rows if r.widen is not None)])

    def to_json(self) -> dict[str, Any]:
        return {"confidence": CONFIDENCE, "distances": list(self.distances),
                "points": [{"label": p.label, "scales": p.scales, "factor": p.factor} for p in self.points],
                "rows": [r.to_json() for r in self.rows], "holds": self.holds, "flagged": self.flagged,
                "widen_factor": self.widen_factor, "fitted_max_distance": self.fitted_max,
                "goal_distance": self.goal_distance, "cpu_estimates": [c.to_json() for c in self.cpu],
                "note": self.note}

    @classmethod
    def from_json(cls, doc: Any) -> Verification:
        """The inverse of :meth:`to_json` (as written to ``verify.json``); InputError (a ValueError) if ``doc``
        is not one. Missing numbers (JSON null: non-finite) come back as nan, or as -inf / +inf
        for an interval's low / high end."""
        try:
            points = tuple(OperatingPoint(label=str(p["label"]),
                                          scales={str(k): float(v) for k, v in p["scales"].items()},
                                          factor=float(p["factor"])) for p in doc["points"])
            rows = tuple(VerifyRow(label=str(r["label"]), quantity=str(r["quantity"]),
                                   distance=None if r["d"] is None else int(r["d"]),
                                   predicted=_interval(r["predicted"]),
                                   sampled=None if r["sampled"] is None else _interval(r["sampled"]),
                                   zero_errors=bool(r["zero_errors"])) for r in doc["rows"])
            opt = {k: None if doc.get(key) is None else int(doc[key])
                   for k, key in (("fitted_max", "fitted_max_distance"), ("goal_distance", "goal_distance"))}
            return cls(points=points, distances=tuple(int(d) for d in doc["distances"]), rows=rows,
                       note=str(doc.get("note", "")), **opt,
                       cpu=tuple(CpuEstimate.from_json(c) for c in doc.get("cpu_estimates", ())))
        except (KeyError, TypeError, ValueError, AttributeError) as exc:
            raise InputError(f"not a verification document ({type(exc).__name__}: {exc})") from None

    def is_current(self, answers: Any) -> bool:
        """Whether this verification was made against ``answers``: the same operating points and
        the same predictions (an earlier fit, before more samples, predicts other numbers)."""
        if answers.model is None:
            return False
        now = operating_points(answers)
        if [p.label for p in now] != [p.label for p in self.points] or not all(
                _same_scales(a.scales, b.scales) for a, b in zip(now, self.points)):
            return False
        scales = {p.label: p.scales for p in self.points}
        for r in self.rows:
            s = scales.get(r.label)
            if s is None:
                return False
            best = (answers.model.logical_error_per_cycle(s, r.distance) if r.distance is not None
                    else answers.model.suppression(s))
            was = r.predicted.best
            same = (math.isclose(best, was, rel_tol=1e-6) if math.isfinite(best)
                    else not math.isfinite(was))  # JSON keeps a non-finite number as null
            if not same:
                return False
        return True


def _interval(doc: Any) -> Interval:
    def f(key: str, missing: float) -> float:
        v = doc[key]
        return missing if v is None else float(v)
    return Interval(low=f("low", -math.inf), best=f("best", math.nan), high=f("high", math.inf))


def operating_points(answers: Any) -> tuple[OperatingPoint, ...]:
    """The joint-factor answer and the cheapest mix (those that are reachable)."""
    req = answers.requirements
    if req is None:
        return ()
    pts = []
    if req.joint.reachable and req.joint.factor is not None:
        f = req.joint.factor
        pts.append(OperatingPoint(label="verify-joint", scales={c: f for c in COMPONENTS}, factor=f))
    if req.mix.reachable and any(v < 1 for v in req.mix.scales.values()):
        pts.append(OperatingPoint(label="verify-mix", scales=dict(req.mix.scales), factor=1.0))
    return tuple(pts)


def verify_distances(fitted: Sequence[int]) -> tuple[int, ...]:
    """The distances above the largest fitted one that verify samples (:data:`BEYOND_STEPS`).

    >>> verify_distances([3, 5, 7]), verify_distances([3]), verify_distances([3, 5, 7, 9, 11])
    ((9, 11), (5, 7), (13, 15))
    """
    d_max = max(fitted)
    return tuple(d_max + k for k in BEYOND_STEPS)


def goal_to_verify(fitted: Sequence[int], goal: int | None) -> int | None:
    """The goal distance when it lies above :func:`verify_distances` (it is sampled apart, when its
    CPU time fits); None when it is already among them or below.

    >>> goal_to_verify([3, 5, 7], 21), goal_to_verify([3, 5, 7], 11), goal_to_verify([3, 5], None)
    (21, None, None)
    """
    if goal is None or goal <= max(verify_distances(fitted)):
        return None
    return goal


def verify_rounds(distance: int) -> tuple[int, ...]:
    """The round counts sampled at ``distance`` (:data:`ROUND_MULTIPLES`).

    >>> verify_rounds(9)
    (9, 27)
    """
    return tuple(k * distance for k in ROUND_MULTIPLES)


def _predicted(models: Sequence[Any], best: float, values: list[float]) -> Interval:
    if not values:
        return Interval(low=best, best=best, high=best)
    q = (1 - CONFIDENCE) / 2
    lo, hi = np.quantile(np.array(values), [q, 1 - q])
    return Interval(low=float(min(lo, best)), best=best, high=float(max(hi, best)))


def _same_scales(a: dict[str, float], b: dict[str, float]) -> bool:
    # the task's own components (a task without [device.leakage] carries no leakage scale)
    return all(math.isclose(a.get(c, 1.0), b.get(c, 1.0), rel_tol=1e-9, abs_tol=1e-12)
               for c in COMPONENTS if c in a)


def _sampled_at(stats: Sequence[sinter.TaskStats], points: Sequence[OperatingPoint], *,
                goal_basis: str = "mean") -> FitReport | None:
    """Fits of the samples taken at ``points`` (a task of another point or label is left out),
    the bases combined as the goal says (``goal_basis``), as the answers' own fits were."""
    def at_a_point(meta: Any) -> bool:
        return isinstance(meta, dict) and any(
            meta.get("axis") == p.label and _same_scales(meta.get("scales", {}), p.scales) for p in points)

    keep = [s for s in stats if at_a_point(s.json_metadata)]
    return fit_stats(keep, goal_basis=goal_basis) if keep else None


def _prediction(answers: Any, key: str, quantity: Any) -> Interval:
    """``quantity(model)`` on the answers' model, with the interval every answer carries: the
    bootstrap's (sampling) combined with the model-form part (the window models' spread and the
    misfit; :func:`planner.planning.modelerror.combine_parts`) when the answers have it."""
    from planner.planning.modelerror import combine_parts

    unc = answers.uncertainty
    models = unc.models if unc else ()
    best = quantity(answers.model)
    pred = _predicted(models, best, [quantity(m) for m in models])
    me = getattr(unc, "model_error", None)
    if me is None:
        return pred
    combined, _, _ = combine_parts(key, best, pred, [quantity(w) for w in me.window_models.values()], me.inflation)
    return combined


def _eps_row(answers: Any, point: OperatingPoint, d: int, report: FitReport | None) -> VerifyRow:
    """Predicted vs sampled eps per cycle at one point and distance."""
    pred = _prediction(answers, "today_eps", lambda m: m.logical_error_per_cycle(point.scales, d))
    got = next((x for x in (report.distances if report else ()) if x.axis == point.label and x.distance == d),
               None)
    return VerifyRow(label=point.label, quantity="logical_error_per_cycle", distance=d, predicted=pred,
                     sampled=got.per_cycle if got else None, zero_errors=bool(got and got.zero_errors))


def _lambda_row(answers: Any, point: OperatingPoint, report: FitReport | None) -> VerifyRow:
    """Predicted vs sampled Lambda at one point."""
    pred = _prediction(answers, "lambda_today", lambda m: m.suppression(point.scales))
    lf = next((x for x in (report.lambdas if report else ()) if x.axis == point.label), None)
    return VerifyRow(label=point.label, quantity="suppression_factor", distance=None, predicted=pred,
                     sampled=lf.suppression if lf else None, zero_errors=bool(lf and lf.uses_zero_error_points))


def _rows_at(answers: Any, point: OperatingPoint, distances: Sequence[int],
             report: FitReport | None) -> list[VerifyRow]:
    """Predicted vs sampled eps at each distance and, with two distances, Lambda at one point."""
    rows = [_eps_row(answers, point, d, report) for d in distances]
    if len(distances) >= 2:
        rows.append(_lambda_row(answers, point, report))
    return rows


def compare(answers: Any, points: Sequence[OperatingPoint], distances: Sequence[int],
            stats: Sequence[sinter.TaskStats], *, cpu: Sequence[CpuEstimate] = ()) -> Verification:
    """Predicted (model, bootstrap interval) vs sampled (fits of ``stats``) at each point and
    distance; a distance of ``cpu`` that was not sampled is left out (its estimate says why)."""
    skipped = {c.distance for c in cpu if not c.sampled}
    distances = tuple(d for d in distances if d not in skipped)
    report = _sampled_at(stats, points, goal_basis=getattr(answers.fits, "goal_basis", "mean"))
    rows = [row for p in points for row in _rows_at(answers, p, distances, report)]
    notes = [] if points else ["no reachable operating point to verify"]
    if len(distances) < 2:
        notes.append("one samplable distance: Lambda not verified")
    notes += [f"d={c.distance} not sampled: {c.why}" for c in cpu if not c.sampled]
    fitted = answers.fits.sampled_distances
    goal = answers.requirements.distance if answers.requirements is not None else None
    return Verification(points=tuple(points), distances=distances, rows=tuple(rows), note="; ".join(notes),
                        fitted_max=max(fitted) if fitted else None, goal_distance=goal, cpu=tuple(cpu))


#: the public name of :func:`compare` (``planner.compare_predictions``)
compare_predictions = compare
