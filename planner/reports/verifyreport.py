"""The verification beyond the fit as tables: predicted against sampled at each operating point
and distance, the verdict (flag and the factor the answers' intervals must widen by) and the
CPU estimates made before sampling. One table model for the terminal, ``verify.md``,
``verify.csv`` and the report's section (``v``: :class:`planner.planning.verify.Verification`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from planner.reports.csvtables import ends
from planner.reports.formats import interval, rate, scales_text
from planner.reports.table import Table

if TYPE_CHECKING:
    from planner.planning.verify import Verification, VerifyRow

__all__ = ["VERIFY_COLUMNS", "verdict", "verify_csv", "verify_tables"]

VERIFY_COLUMNS = ("point", "quantity", "distance", "predicted", "predicted_low", "predicted_high",
                  "sampled", "sampled_low", "sampled_high", "zero_errors", "holds", "covered", "widen")


def verdict(v: Verification) -> str:
    """One line: whether the predictions cover what was sampled beyond the fit.

    >>> from planner.planning.verify import Verification
    >>> verdict(Verification(points=(), distances=(), rows=()))
    'nothing sampled to judge the predictions by'
    """
    judged = [r for r in v.rows if r.covered is not None]
    if not judged:
        return "nothing sampled to judge the predictions by"
    where = (f" (fitted up to d={v.fitted_max}" + (f", goal d={v.goal_distance}" if v.goal_distance else "")
             + ")") if v.fitted_max else ""
    if not v.flagged:
        return f"every sampled value lies inside its predicted interval{where}."
    bad = sum(r.covered is False for r in judged)
    return (f"FLAGGED: {bad} of {len(judged)} sampled values lie outside their predicted intervals{where}: "
            f"the answers' intervals must widen x{v.widen_factor:.3g} (log half-width) to cover them.")


def _judgement(r: VerifyRow) -> str:
    if r.covered is None:
        return "not sampled" if r.sampled is None else "bound only"
    return "inside" if r.covered else f"OUTSIDE (widen x{r.widen:.3g})"


def _row(v: Verification, r: VerifyRow) -> tuple[str, ...]:
    is_eps = r.quantity == "logical_error_per_cycle"
    pred = rate(r.predicted.best, r.predicted) if is_eps else interval(r.predicted)
    sampled = interval(r.sampled) + (" *" if r.zero_errors else "")
    beyond = r.distance is not None and v.fitted_max is not None and r.distance > v.fitted_max
    dist = "—" if r.distance is None else f"{r.distance}" + (
        " (goal)" if r.distance == v.goal_distance else " (beyond fit)" if beyond else "")
    return (r.label, "eps per cycle" if is_eps else "Lambda (ratio)", dist, pred, sampled, _judgement(r))


def _cpu_table(v: Verification) -> Table:
    return Table(key="verify_cpu", title="CPU estimates made before sampling",
                 headers=("distance", "tasks", "shots", "CPU estimate (s)", "s per detector per shot",
                          "sampled", "why"),
                 rows=[(str(c.distance), str(c.tasks), f"{c.shots:.3g}", f"{c.seconds:.3g}",
                        f"{c.seconds_per_detector:.2g}", "yes" if c.sampled else "no", c.why or "—")
                       for c in v.cpu], left=(0, 5, 6))


def verify_tables(v: Verification) -> list[Table]:
    """The predicted-vs-sampled table and, when estimates were made, the CPU table."""
    points = "; ".join(f"{p.label}: {scales_text(p.scales)}" for p in v.points)
    lead = (f"Operating points sampled on the simulator (scale on today's error): {points or 'none'}.",
            f"Distances: {', '.join(map(str, v.distances)) or 'none'}; each at r = d and 3d rounds, the "
            "per-cycle rate from the fits.", "Verdict: " + verdict(v))
    notes = ["inside: the sampled best lies in the predicted interval; OUTSIDE: it does not, and the "
             "predicted interval must widen by the factor shown (log half-width about its best) to hold it.",
             "Predictions beyond the fitted distances are extrapolations of the response model.",
             *(["* no errors sampled: the sampled interval is a bound."] if any(r.zero_errors for r in v.rows)
               else []), *([v.note] if v.note else [])]
    out = [Table(key="verify", title="Verification beyond the fit: predicted vs sampled at the proposed operating points",
                 headers=("point", "quantity", "distance", "predicted (model, bootstrap)",
                          "sampled (fit of the samples)", "verdict"),
                 rows=[_row(v, r) for r in v.rows], lead=lead, notes=notes, left=(0, 1, 2, 5), fold_key=3)]
    return out + ([_cpu_table(v)] if v.cpu else [])


def verify_csv(v: Verification) -> Table:
    """One row per (operating point, quantity, distance), raw values; ``distance`` empty for
    Lambda; ``covered``/``widen`` empty where not judged."""
    rows = [(r.label, r.quantity, r.distance, *ends(r.predicted), *ends(r.sampled), r.zero_errors, r.holds,
             r.covered, r.widen) for r in v.rows]
    return Table(key="verify_csv", title="verify", headers=VERIFY_COLUMNS, rows=rows)
