"""The report CSV files as tables of raw values, one builder per result.

CSV is for programs: one header row, raw numbers at full precision, intervals as separate
``best``/``low``/``high`` columns (or ``<figure>``, ``<figure>_low``, ``<figure>_high``),
empty cells for missing values; :func:`planner.reports.table.to_csv` writes them.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Any

from planner.config import COMPONENTS
from planner.fits import Interval
from planner.reports.cells import group_row, lever_note
from planner.reports.formats import POINT_VALUE, halvings
from planner.reports.table import INTEGER_COLUMNS, Table

if TYPE_CHECKING:
    from planner.fits import FitReport
    from planner.planning import FactorAnswer, MixAnswer, Requirements, Roadmap, Sensitivity

REQUIREMENTS_COLUMNS = ("quantity", "lever", "unit", "best", "low", "high", "reachable",
                        "extrapolated", "note")
#: the figures of a sensitivity row, each written as best then ``_low`` / ``_high`` columns
SENSITIVITY_FIGURES = (("share_of_inverse_lambda", "share"), ("elasticity", "elasticity"),
                       ("suppression_factor_halved", "suppression_halved"),
                       ("suppression_factor_perfect", "suppression_perfect"),
                       ("months_earlier", "months_earlier"),
                       ("logical_error_per_cycle_halved", "eps_halved"),
                       ("logical_error_per_cycle_perfect", "eps_perfect"))
SENSITIVITY_COLUMNS = ("component", *(f"{name}{end}" for name, _ in SENSITIVITY_FIGURES
                                      for end in ("", "_low", "_high")), "lumped", "note", "sampled")
DATES_COLUMNS = ("event", "date", "low", "high", "fraction_of_scenarios_reached")

Row = tuple[Any, ...]
#: per-distance fit columns before the per-basis ones (``eps_<basis>``, ``offset_<basis>`` with
#: ``_low``/``_high``, ``method_<basis>``)
DISTANCE_COLUMNS = ("axis", "factor", "distance", "rounds", "goal_basis", "method", "eps", "eps_low",
                    "eps_high", "eps_single_round", "eps_single_round_low", "eps_single_round_high", "zero_errors")


def fits_distance_csv(report: FitReport) -> Table:
    """Per (point, distance): eps per cycle as the goal combines the bases, the single-round
    estimate, and per basis its decay estimate, boundary offset C and method (raw values)."""
    bases = sorted({b for p in report.distances for b in p.bases})
    headers = (*DISTANCE_COLUMNS, *(f"{k}_{b}{end}" for b in bases for k in ("eps", "offset")
                                    for end in ("", "_low", "_high")), *(f"method_{b}" for b in bases))
    rows = []
    for p in report.distances:
        fits = [p.basis_fit(b) for b in bases]
        rows.append((p.axis, p.factor, p.distance, " ".join(map(str, p.rounds)), report.goal_basis, p.method,
                     *ends(p.per_cycle), *ends(p.per_cycle_single_round), p.zero_errors,
                     *(x for f in fits for x in (*ends(f.per_cycle if f else None),
                                                 *ends(f.offset if f else None))),
                     *(f.method if f else "" for f in fits)))
    return Table(title="Logical error per cycle per distance", headers=headers, rows=rows, key="fits_distances")


def ends(iv: Interval | None, best: float | None = None) -> tuple[float | None, float | None, float | None]:
    """``(best, low, high)`` of an interval; ``(best, None, None)`` without one.

    >>> ends(Interval(low=1.0, best=2.0, high=3.0)), ends(None, 5.0)
    ((2.0, 1.0, 3.0), (5.0, None, None))
    """
    if iv is None:
        return best, None, None
    return iv.best, iv.low, iv.high


# ---------------------------------------------------------------------------------------------
# requirements (long format: one row per quantity and lever)


def _goal_rows(req: Requirements, lambda_today_model: Interval | None) -> list[Row]:
    td = req.today
    model_lam = td.suppression_model_interval or lambda_today_model
    return [
        ("target_logical_error_per_cycle", "", "per cycle", req.eps_target, None, None, None, None, "goal"),
        ("distance", "", "", req.distance, None, None, None, None, req.distance_source),
        ("physical_qubits", "", "qubits", req.physical_qubits, None, None, None, None, req.qubit_rule),
        ("required_suppression_factor", "", "ratio",
         *ends(req.required_suppression_interval, req.required_suppression), None, None,
         "with today's prefactor" + ("" if req.required_suppression_interval else f"; {POINT_VALUE}")),
        ("suppression_factor_today_fitted", "joint", "ratio", *ends(td.suppression_fitted), None, None,
         "fitted at joint factor 1"),
        ("suppression_factor_today_model", "", "ratio", *ends(model_lam, td.suppression_model),
         None, None, "response model"),
        ("today_logical_error_per_cycle", "", "per cycle",
         *ends(td.logical_error_per_cycle_interval, td.logical_error_per_cycle), None, None,
         f"response model at distance {req.distance}"),
        ("today_distance", "", "", *ends(td.distance_interval, td.distance), td.distance is not None,
         None, td.note),
        ("today_physical_qubits", "", "qubits", td.physical_qubits, None, None, td.within_max_qubits,
         None, f"within the budget of {td.max_qubits} qubits" if td.within_max_qubits else ""),
    ]


def _flags(a: FactorAnswer) -> tuple[str, ...]:
    """Marginal verdict, misfit and the dominant interval part, for the note column."""
    return (*(["marginal: no verdict either way"] if a.marginal else []),
            *(["model misfit: unreliable"] if a.model_misfit else []),
            *([f"interval mostly from {a.interval_source}"] if a.interval_source else []))


def _lever_rows(req: Requirements) -> list[Row]:
    rows: list[Row] = []
    for a in (req.joint, *req.components):
        rows.append(("factor_needed", a.lever, "x today's error", *ends(a.factor_interval, a.factor),
                     a.reachable, bool(a.extrapolation),
                     "; ".join(x for x in (lever_note(a), *a.extrapolation, *_flags(a)) if x)))
        rows.append(("suppression_factor_reached", a.lever, "ratio", *ends(a.suppression_interval, a.suppression),
                     a.reachable, bool(a.extrapolation),
                     lever_note(a) if not a.sampled
                     else "" if a.reachable else f"with {a.lever} perfect, the most it gives alone"))
    return rows


def _mix_rows(mix: MixAnswer) -> list[Row]:
    rows: list[Row] = []
    for c, s in mix.scales.items():
        extrapolated = any(x.startswith(f"{c} ") for x in mix.extrapolation)
        h, h_iv = halvings(mix.scale_intervals.get(c), s)
        kept = "not sampled: kept at today's error" if c in mix.not_sampled else ""
        rows.append(("cheapest_mix_factor", c, "x today's error", *ends(mix.scale_intervals.get(c), s),
                     mix.reachable, extrapolated, kept))
        rows.append(("cheapest_mix_halvings", c, "halvings (log2 of 1/factor)", *ends(h_iv, h),
                     mix.reachable, extrapolated, ""))
        rows.append(("cheapest_mix_cost_share", c, "fraction of the cost",
                     *ends(mix.cost_share_intervals.get(c), mix.cost_shares.get(c, 0.0)),
                     mix.reachable, extrapolated, ""))
    whole = bool(mix.extrapolation)
    rows.append(("cheapest_mix_cost", "", "cost-weighted halvings", *ends(mix.cost_interval, mix.cost),
                 mix.reachable, whole, mix.note))
    rows.append(("cheapest_mix_suppression_factor", "", "ratio", *ends(mix.suppression_interval, mix.suppression),
                 mix.reachable, whole, ""))
    rows.append(("cheapest_mix_logical_error_per_cycle", "", "per cycle", mix.logical_error_per_cycle, None,
                 None, mix.reachable, whole, "the goal: the mix is solved to meet it"))
    return rows


def requirements_rows(req: Requirements, *, lambda_today_model: Interval | None = None) -> list[Row]:
    """Long format: one row per quantity (and lever), columns :data:`REQUIREMENTS_COLUMNS`;
    ``low``/``high`` are the bootstrap (model answers) or likelihood-ratio (fitted Lambda) ends,
    empty for inputs and for model values without an interval."""
    return [*_goal_rows(req, lambda_today_model), *_lever_rows(req), *_mix_rows(req.mix)]


def requirements_csv(req: Requirements, *, lambda_today_model: Interval | None = None) -> Table:
    """requirements.csv; distances and qubits are written as integers ('35', not '35.0')."""
    rows = requirements_rows(req, lambda_today_model=lambda_today_model)
    return Table(key="requirements_csv", title="requirements", headers=REQUIREMENTS_COLUMNS, rows=rows,
                 integer_rows=[r[0] in INTEGER_COLUMNS for r in rows])


# ---------------------------------------------------------------------------------------------
# roadmap, sensitivity


def roadmap_columns(rm: Roadmap) -> tuple[str, ...]:
    """Steps of the roadmap: best values and their bootstrap ends (``eps_low_d<d>``,
    ``eps_high_d<d>``), empty ends without replica models."""
    return ("date", "years", *(f"scale_{c}" for c in COMPONENTS), "suppression_factor",
            "suppression_factor_low", "suppression_factor_high",
            *(f"{k}{d}" for d in rm.candidate_distances for k in ("eps_d", "eps_low_d", "eps_high_d")),
            "distance", "physical_qubits", "extrapolation")


def roadmap_rows(rm: Roadmap) -> list[Row]:
    return [(s.date.isoformat(), s.years, *(s.scales[c] for c in COMPONENTS),
             *ends(s.suppression_interval, s.suppression),
             *(x for d in rm.candidate_distances for x in ends(s.eps_intervals.get(d), s.eps[d])),
             s.distance, s.physical_qubits, "; ".join(s.extrapolation)) for s in rm.steps]


def roadmap_date_rows(rm: Roadmap) -> list[Row]:
    iso = lambda d: d.isoformat() if d else None  # noqa: E731
    return [(e.what, iso(e.date), iso(e.low), iso(e.high), e.fraction_reached if rm.num_scenarios else None)
            for e in (rm.goal, *rm.milestones)]


def roadmap_csv(rm: Roadmap) -> list[Table]:
    """roadmap.csv (the steps) and roadmap_dates.csv (the goal and the milestones)."""
    return [Table(key="roadmap_csv", title="roadmap", headers=roadmap_columns(rm), rows=roadmap_rows(rm)),
            Table(key="roadmap_dates_csv", title="roadmap_dates", headers=DATES_COLUMNS,
                  rows=roadmap_date_rows(rm))]


def sensitivity_rows(sens: Sensitivity, *, lumped: Sequence[str] = ()) -> list[Row]:
    """One row per component; one without its own sweep axis has empty figures, ``sampled``
    False, and a note with how to sample it and its group's share together (%)."""
    rows: list[Row] = []
    for r in sens.rows:
        note = r.note
        if not r.sampled and (group := group_row(sens)) is not None:
            note = f"{note}; {group[0]}: {group[1]} % of 1/Lambda"
        rows.append((r.component, *(x for _, attr in SENSITIVITY_FIGURES
                                    for x in ends(r.intervals.get(attr), getattr(r, attr))),
                     r.component in lumped or not r.sampled, note, r.sampled))
    return rows


def sensitivity_csv(sens: Sensitivity, *, lumped: Sequence[str] = ()) -> Table:
    return Table(key="sensitivity_csv", title="sensitivity", headers=SENSITIVITY_COLUMNS,
                 rows=sensitivity_rows(sens, lumped=lumped))


def csv_files(result: Requirements | Roadmap | Sensitivity, *, lambda_today_model: Interval | None = None,
              lumped: Sequence[str] = ()) -> list[tuple[str, Table]]:
    """The CSV files of one stage's result, as (file name, table)."""
    from planner.planning import Requirements, Roadmap

    if isinstance(result, Requirements):
        return [("requirements.csv", requirements_csv(result, lambda_today_model=lambda_today_model))]
    if isinstance(result, Roadmap):
        steps, dates = roadmap_csv(result)
        return [("roadmap.csv", steps), ("roadmap_dates.csv", dates)]
    return [("sensitivity.csv", sensitivity_csv(result, lumped=lumped))]
