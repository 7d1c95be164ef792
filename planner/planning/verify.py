"""Checking the answers on the simulator: the operating points to sample and the comparison of
what was sampled there with the prediction (the sampling is :mod:`planner.jobs.verify`).

The operating points are the joint-factor answer and the cheapest mix; they are sampled at the
two largest sampled distances (capped at :data:`MAX_VERIFY_DISTANCE` so it stays affordable) and
the sampled eps per cycle and Lambda are compared with the model's prediction. A prediction
"holds" where the two :data:`~planner.fits.CONFIDENCE` intervals overlap.
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

MAX_VERIFY_DISTANCE = 7


@dataclasses.dataclass(frozen=True, kw_only=True)
class OperatingPoint:
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

    def to_json(self) -> dict[str, Any]:
        return {"label": self.label, "quantity": self.quantity, "d": self.distance,
                "predicted": self.predicted.to_json(),
                "sampled": self.sampled.to_json() if self.sampled else None,
                "zero_errors": self.zero_errors, "holds": self.holds}


@dataclasses.dataclass(frozen=True, kw_only=True)
class Verification:
    """Predicted against sampled logical error per cycle at the proposed operating points and
    distances; ``holds`` is False when a sample falls outside the prediction."""

    points: tuple[OperatingPoint, ...]
    distances: tuple[int, ...]
    rows: tuple[VerifyRow, ...]
    note: str = ""

    @property
    def holds(self) -> bool:
        return all(r.holds is not False for r in self.rows)

    def to_json(self) -> dict[str, Any]:
        return {"confidence": CONFIDENCE, "distances": list(self.distances),
                "points": [{"label": p.label, "scales": p.scales, "factor": p.factor} for p in self.points],
                "rows": [r.to_json() for r in self.rows], "holds": self.holds, "note": self.note}

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
            return cls(points=points, distances=tuple(int(d) for d in doc["distances"]), rows=rows,
                       note=str(doc.get("note", "")))
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


def verify_distances(sampled: Sequence[int]) -> tuple[int, ...]:
    """The two largest sampled distances no larger than the cap (the smallest if none fits).

    >>> verify_distances([3, 5, 7, 9]), verify_distances([3]), verify_distances([9, 11])
    ((5, 7), (3,), (9,))
    """
    ok = sorted(d for d in sampled if d <= MAX_VERIFY_DISTANCE)
    return tuple(ok[-2:]) if ok else (min(sampled),)


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


def _sampled_at(stats: Sequence[sinter.TaskStats], points: Sequence[OperatingPoint]) -> FitReport | None:
    """Fits of the samples taken at ``points`` (a task of another point or label is left out)."""
    def at_a_point(meta: Any) -> bool:
        return isinstance(meta, dict) and any(
            meta.get("axis") == p.label and _same_scales(meta.get("scales", {}), p.scales) for p in points)

    keep = [s for s in stats if at_a_point(s.json_metadata)]
    return fit_stats(keep) if keep else None


def _eps_row(answers: Any, point: OperatingPoint, d: int, report: FitReport | None) -> VerifyRow:
    """Predicted vs sampled eps per cycle at one point and distance."""
    models = answers.uncertainty.models if answers.uncertainty else ()
    best = answers.model.logical_error_per_cycle(point.scales, d)
    pred = _predicted(models, best, [m.logical_error_per_cycle(point.scales, d) for m in models])
    got = next((x for x in (report.distances if report else ()) if x.axis == point.label and x.distance == d),
               None)
    return VerifyRow(label=point.label, quantity="logical_error_per_cycle", distance=d, predicted=pred,
                     sampled=got.per_cycle if got else None, zero_errors=bool(got and got.zero_errors))


def _lambda_row(answers: Any, point: OperatingPoint, report: FitReport | None) -> VerifyRow:
    """Predicted vs sampled Lambda at one point."""
    models = answers.uncertainty.models if answers.uncertainty else ()
    best = answers.model.suppression(point.scales)
    pred = _predicted(models, best, [m.suppression(point.scales) for m in models])
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
            stats: Sequence[sinter.TaskStats]) -> Verification:
    """Predicted (model, bootstrap interval) vs sampled (fits of ``stats``) at each point."""
    report = _sampled_at(stats, points)
    rows = [row for p in points for row in _rows_at(answers, p, distances, report)]
    note = "" if points else "no reachable operating point to verify"
    if len(distances) < 2:
        note = (note + "; " if note else "") + "one samplable distance: Lambda not verified"
    return Verification(points=tuple(points), distances=tuple(distances), rows=tuple(rows), note=note)
