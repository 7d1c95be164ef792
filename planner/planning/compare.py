"""Two devices side by side: the headline answers of two planned out directories (a hardware
revision against the one before), their differences, and whether each difference goes beyond
the intervals.

A row compares one quantity of device A with the same quantity of device B. ``ratio`` is B / A
(for dates: ``change`` is B - A in months). A difference counts as beyond the intervals when the
two :data:`~planner.fits.CONFIDENCE` intervals do not overlap: a conservative test (two
overlapping 95% intervals can still differ significantly), stated in every report of it.

Quantities at a distance are compared at the same distance for both devices (A's goal
distance), evaluated on each device's own response model and its bootstrap replicas.

>>> a = Interval(best=2.0, low=1.9, high=2.1)
>>> row = compare_values("Lambda today", a, Interval(best=2.4, low=2.3, high=2.5))
>>> round(row.ratio, 3), row.beyond_intervals
(1.2, True)
"""

from __future__ import annotations

import dataclasses
import datetime as dt
from collections.abc import Sequence
from typing import Any

from planner.config import COMPONENTS
from planner.fits import CONFIDENCE, Interval
from planner.planning.uncertainty import replica_interval

__all__ = ["Comparison", "ComparisonRow", "compare_answers", "compare_values"]

#: the verdict words (also in the JSON as ``beyond_intervals`` true/false/null)
BEYOND = "beyond"
WITHIN = "within"
NO_INTERVAL = "no interval"


@dataclasses.dataclass(frozen=True, kw_only=True)
class ComparisonRow:
    """One quantity on both devices. ``a``/``b``: Interval (best only when ``low``/``high`` are
    the best), dates as ``(date, low, high)`` in ``a_date``/``b_date``."""

    quantity: str
    kind: str  # "number", "rate", "date", "distance"
    a: Interval | None = None
    b: Interval | None = None
    a_date: tuple[dt.date | None, dt.date | None, dt.date | None] | None = None
    b_date: tuple[dt.date | None, dt.date | None, dt.date | None] | None = None
    has_intervals: bool = True
    note: str = ""

    @property
    def ratio(self) -> float | None:
        """B / A (None for dates or a missing or zero value)."""
        if self.a is None or self.b is None or not self.a.best:
            return None
        return self.b.best / self.a.best

    @property
    def change_months(self) -> float | None:
        """B - A in months, for dates."""
        if not self.a_date or not self.b_date or self.a_date[0] is None or self.b_date[0] is None:
            return None
        return (self.b_date[0] - self.a_date[0]).days / 30.4375

    @property
    def beyond_intervals(self) -> bool | None:
        """True when the two intervals do not overlap, False when they do, None without both."""
        if self.kind == "date":
            if not self.a_date or not self.b_date or None in (*self.a_date, *self.b_date):
                return None
            (_, alo, ahi), (_, blo, bhi) = self.a_date, self.b_date
            return bool(ahi < blo or bhi < alo)  # type: ignore[operator]
        if self.a is None or self.b is None or not self.has_intervals:
            return None
        return not self.a.overlaps(self.b)

    @property
    def verdict(self) -> str:
        v = self.beyond_intervals
        return NO_INTERVAL if v is None else BEYOND if v else WITHIN

    def to_json(self) -> dict[str, Any]:
        def date(t: Any) -> Any:
            return None if t is None else {k: (x.isoformat() if x else None) for k, x in zip(("best", "low", "high"), t)}

        out: dict[str, Any] = {"quantity": self.quantity, "kind": self.kind,
                               "beyond_intervals": self.beyond_intervals, "verdict": self.verdict, "note": self.note}
        if self.kind == "date":
            out.update(a=date(self.a_date), b=date(self.b_date), change_months=self.change_months)
        else:
            out.update(a=self.a.to_json() if self.a else None, b=self.b.to_json() if self.b else None,
                       ratio=self.ratio)
        return out


@dataclasses.dataclass(frozen=True, kw_only=True)
class Comparison:
    """Device A against device B: names, the distance the rate rows are taken at, the rows."""

    name_a: str
    name_b: str
    distance: int | None
    rows: tuple[ComparisonRow, ...]
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        return {"a": self.name_a, "b": self.name_b, "confidence": CONFIDENCE, "distance": self.distance,
                "test": "beyond_intervals: the two intervals do not overlap (conservative)",
                "rows": [r.to_json() for r in self.rows], "notes": list(self.notes)}


def compare_values(quantity: str, a: Interval | None, b: Interval | None, *, kind: str = "number",
                   note: str = "") -> ComparisonRow:
    """A row from two intervals (a best-only value: an Interval whose ends equal its best, marked
    as having no interval)."""
    has = all(iv is not None and (iv.low < iv.best or iv.high > iv.best) for iv in (a, b))
    return ComparisonRow(quantity=quantity, kind=kind, a=a, b=b, has_intervals=has, note=note)


def _value(best: float | None, iv: Interval | None) -> Interval | None:
    if best is None:
        return None
    return iv if iv is not None else Interval(best=float(best), low=float(best), high=float(best))


def _eps_at(answers: Any, distance: int) -> Interval | None:
    """Model eps per cycle today at ``distance``, with the interval over the replica models."""
    if answers.model is None:
        return None
    best = answers.model.logical_error_per_cycle(None, distance)
    models = answers.uncertainty.models if answers.uncertainty is not None else ()
    iv = replica_interval(best, [m.logical_error_per_cycle(None, distance) for m in models])
    return _value(best, iv)


def _headline_rows(a: Any, b: Any, distance: int | None) -> list[ComparisonRow]:
    ra, rb = a.requirements, b.requirements
    rows = []
    fa, fb = a.fits.today(), b.fits.today()
    rows.append(compare_values("Lambda today, fitted", fa.suppression if fa else None,
                               fb.suppression if fb else None))
    if ra is None or rb is None:
        return rows
    rows.append(compare_values("Lambda today, model",
                               _value(ra.today.suppression_model, ra.today.suppression_model_interval),
                               _value(rb.today.suppression_model, rb.today.suppression_model_interval)))
    if distance is not None:
        rows.append(compare_values(f"eps/cycle today, d={distance}", _eps_at(a, distance),
                                   _eps_at(b, distance), kind="rate"))
    rows.append(compare_values("distance for the goal today",
                               _value(ra.today.distance, ra.today.distance_interval),
                               _value(rb.today.distance, rb.today.distance_interval), kind="distance"))
    goals = "" if ra.eps_target == rb.eps_target and ra.distance == rb.distance else \
        f"each device at its own goal ({ra.eps_target:g} at d = {ra.distance} vs {rb.eps_target:g} at d = {rb.distance})"
    rows.append(compare_values("required Lambda", _value(ra.required_suppression, ra.required_suppression_interval),
                               _value(rb.required_suppression, rb.required_suppression_interval), note=goals))
    rows.append(compare_values("joint factor for the goal", _value(ra.joint.factor, ra.joint.factor_interval),
                               _value(rb.joint.factor, rb.joint.factor_interval), note=goals))
    return rows + _lever_rows(ra, rb, goals)


def _lever_rows(ra: Any, rb: Any, goals: str) -> list[ComparisonRow]:
    """Each component alone: the factor reaching the goal (components sampled on both devices)."""
    rows = []
    by_a = {x.lever: x for x in ra.components}
    by_b = {x.lever: x for x in rb.components}
    for c in COMPONENTS:
        xa, xb = by_a.get(c), by_b.get(c)
        if xa is None or xb is None or not (xa.sampled and xb.sampled) or (xa.factor is None and xb.factor is None):
            continue
        rows.append(compare_values(f"{c} alone: factor", _value(xa.factor, xa.factor_interval),
                                   _value(xb.factor, xb.factor_interval), note=goals))
    return rows


def _share_rows(a: Any, b: Any) -> list[ComparisonRow]:
    if a.sensitivity is None or b.sensitivity is None:
        return []
    sa = {r.component: r for r in a.sensitivity.rows if r.sampled}
    sb = {r.component: r for r in b.sensitivity.rows if r.sampled}
    return [compare_values(f"{c}: share of 1/Lambda", _value(sa[c].share, sa[c].intervals.get("share")),
                           _value(sb[c].share, sb[c].intervals.get("share")))
            for c in COMPONENTS if c in sa and c in sb and sa[c].share is not None and sb[c].share is not None]


def _date_rows(a: Any, b: Any) -> list[ComparisonRow]:
    if a.roadmap is None or b.roadmap is None:
        return []
    out = []
    pairs = [(a.roadmap.goal, b.roadmap.goal)]
    by_b = {e.what: e for e in b.roadmap.milestones}
    pairs += [(e, by_b[e.what]) for e in a.roadmap.milestones if e.what in by_b]
    for ea, eb in pairs:
        out.append(ComparisonRow(quantity=f"date: {ea.what}", kind="date", a_date=(ea.date, ea.low, ea.high),
                                 b_date=(eb.date, eb.low, eb.high)))
    return out


def compare_answers(a: Any, b: Any, *, name_a: str = "A", name_b: str = "B",
                    distance: int | None = None) -> Comparison:
    """Compare two :class:`~planner.planning.Answers` (A the reference). ``distance``: where the
    rate rows are taken (default: A's goal distance)."""
    if distance is None and a.requirements is not None:
        distance = a.requirements.distance
    rows: Sequence[ComparisonRow] = [*_headline_rows(a, b, distance), *_share_rows(a, b), *_date_rows(a, b)]
    notes = ["model-based: every figure comes from each device's sampled model; a projection beyond the sampled "
             "distances is an extrapolation"]
    if a.requirements is None or b.requirements is None:
        notes.append("one of the directories has no model (fewer than two distances): only fitted figures compared")
    return Comparison(name_a=name_a, name_b=name_b, distance=distance, rows=tuple(rows), notes=tuple(notes))
