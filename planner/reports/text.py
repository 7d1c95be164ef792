"""The report tables of the out directory's Markdown files and report.html, built once per result.

Builders take the planning result objects and return :class:`~planner.reports.table.Table`
values; renderers (:func:`~planner.reports.table.to_markdown`, :mod:`planner.reports.html`, and
for verify the terminal) only lay them out. Every number goes through
:mod:`planner.reports.formats`; intervals read ``best [low, high]`` at
:data:`~planner.fits.CONFIDENCE`, stated once per document (:data:`INTERVAL_NOTE`).

The formatters and the table model are re-exported here under the names reports and scripts
have used (``text.num``, ``text.span``, ``text.TextTable``, ``text.to_markdown``...).
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

from planner.fits import CONFIDENCE, FitReport, Interval, LambdaFit
from planner.reports.cells import (
    MARGINAL_NOTE,
    MISFIT_NOTE,
    SOURCE_NOTE,
    event_rows,
    goal_distance,
    group_row,
    lambda_today_model,
    lever_cells,
    lever_note,
    lumped_components,
    source_cell,
    mix_cells,
    moving_components,
    sensitivity_cells,
    step_cells,
)
from planner.reports.formats import (
    BEYOND,
    CAVEAT,
    EXTRAPOLATED,
    EXTRAPOLATED_NOTE,
    INTERVAL_NOTE,
    OVERFLOW_NOTES,
    POINT_VALUE,
    TINY,
    UNDERFLOW,
    estimate,
    halvings,
    interval,
    join_notes,
    num,
    overflow_notes,
    rate,
    scales_text,
    span,
)
from planner.reports.jsondoc import json_safe
from planner.reports.physical import physical_tables
from planner.reports.table import Table, TextTable, to_markdown

if TYPE_CHECKING:
    from planner.planning import Answers, Requirements, Roadmap, Sensitivity, Uncertainty

__all__ = ["BEYOND", "lambda_today_model", "lumped_components", "event_rows", "CAVEAT", "EXTRAPOLATED", "EXTRAPOLATED_NOTE", "INTERVAL_NOTE", "OVERFLOW_NOTES",
           "POINT_VALUE", "TINY", "UNDERFLOW", "VERIFY_STALE", "Table", "TextTable", "estimate", "fits_tables",
           "goal_distance", "halvings", "interval", "json_safe", "lever_note", "moving_components", "num",
           "overflow_notes", "rate", "requirements_tables", "roadmap_tables", "sensitivity_tables", "span",
           "to_markdown"]


#: the Markdown file and heading of each stage's tables
MARKDOWN_FILES = {"requirements": ("requirements.md", "Requirements for the goal"), "roadmap": ("roadmap.md", "Roadmap"),
                  "sensitivity": ("sensitivity.md", "Sensitivity")}


def report_tables(answers: Answers) -> dict[str, list[Table]]:
    """Every report table of one set of answers by stage (``fits``, and ``requirements``,
    ``roadmap``, ``sensitivity`` where the answers have them): built once, for the Markdown files
    and the page alike."""
    tables = {"fits": fits_tables(answers.fits)}
    if answers.requirements is not None:
        tables["requirements"] = requirements_tables(answers.requirements, uncertainty=answers.uncertainty,
                                                     lambda_today_model=lambda_today_model(answers))
    if answers.roadmap is not None:
        tables["roadmap"] = roadmap_tables(answers.roadmap)
    if answers.sensitivity is not None:
        tables["sensitivity"] = sensitivity_tables(answers.sensitivity, lumped=lumped_components(answers))
    return tables


# ---------------------------------------------------------------------------------------------
# requirements


def _with_point_note(best: float | None, iv: Interval | None, *, is_rate: bool = False) -> str:
    if is_rate:
        return rate(best, iv) if iv is not None else f"{rate(best)} ({POINT_VALUE})"
    return estimate(best, iv) if iv is not None else f"{num(best)} ({POINT_VALUE})"


#: readable names of the keys of Uncertainty.reachable_fraction
_ANSWER_NAMES = {"joint_factor": "joint factor", "today_distance": "today's distance", "mix": "cheapest mix"}


def _replica_note(uncertainty: Uncertainty | None) -> str:
    """How many bootstrap replicas, and the answers that exist on fewer than all of them (their
    intervals are over the replicas where they do).

    >>> from planner.planning import Uncertainty
    >>> _replica_note(Uncertainty(replicas=200, intervals={}, reachable_fraction={"factor.gate_2q": 0.47, "joint_factor": 1.0, "mix": 0.87}, models=()))
    'Bootstrap intervals over 200 replica models of the fit. Replicas on which an answer exists, where not all (its interval is over those): gate_2q alone 47%, cheapest mix 87%.'
    """
    if uncertainty is None:
        return ""
    partial = [f"{_ANSWER_NAMES.get(k, k.removeprefix('factor.') + ' alone')} {v:.0%}"
               for k, v in uncertainty.reachable_fraction.items() if 0 < v < 1]
    return (f"Bootstrap intervals over {uncertainty.replicas} replica models of the fit"
            + (", combined with the model-form part (distance windows, misfit)" if uncertainty.model_error else "")
            + "."
            + (" Replicas on which an answer exists, where not all (its interval is over those): "
               + ", ".join(partial) + "." if partial else ""))


def requirements_tables(req: Requirements, *, lambda_today_model: Interval | None = None,
                        uncertainty: Uncertainty | None = None) -> list[Table]:
    """What each lever needs for the goal (``req``: :class:`planner.planning.Requirements`).

    ``lambda_today_model``: the bootstrap interval of the model's Lambda today when ``req`` does
    not carry it; ``uncertainty``: the :class:`planner.planning.Uncertainty` behind the intervals
    (for the replica count in the notes).
    """
    td = req.today
    model_lam = td.suppression_model_interval or lambda_today_model
    lead = (
        f"Goal: logical error per cycle <= {num(req.eps_target)} at distance {req.distance} "
        f"({req.physical_qubits} physical qubits, {req.qubit_rule}; distance {req.distance_source}).",
        "Lambda needed at that distance with today's prefactor: "
        f"{_with_point_note(req.required_suppression, req.required_suppression_interval)}.",
        f"Lambda today: {interval(td.suppression_fitted)} fitted at joint factor 1; "
        f"{_with_point_note(td.suppression_model, model_lam)} from the response model.",
        f"Logical error per cycle today at distance {req.distance} (response model): "
        f"{_with_point_note(td.logical_error_per_cycle, td.logical_error_per_cycle_interval, is_rate=True)}.",
        "Smallest distance meeting the goal with today's device: "
        + (f"{estimate(td.distance, td.distance_interval)} ({td.physical_qubits} physical qubits)"
           if td.distance else "none")
        + (f"; {td.note}" if td.note else "") + ".",
    )
    mix = req.mix
    rows = []
    levers = (req.joint, *req.components)
    for a in levers:
        rows.append((a.lever, *lever_cells(a), *mix_cells(mix, a.lever),
                     source_cell(a.interval_source, a.model_misfit), join_notes(lever_note(a), *a.extrapolation)))
    total = estimate(mix.cost, mix.cost_interval)
    mix_lam = estimate(mix.suppression, mix.suppression_interval)
    notes = [f"Cheapest mix ({'reachable' if mix.reachable else 'not reachable'}): cost {total} "
             f"cost-weighted halvings of error (sum over components of cost x log2(1/factor)), Lambda "
             f"{mix_lam}; logical error per cycle {rate(mix.logical_error_per_cycle)} at distance "
             f"{req.distance}, the goal it is solved to meet" + (f"; {mix.note}" if mix.note else "") + ".",
             "Lambda reached: at the factor needed; 'max': with the component perfect, the most it "
             "gives alone. Cost share: the component's part of the mix's cost.",
             f"Model: {req.model_form} form; fit quality: {req.model_quality}.",
             _replica_note(uncertainty), SOURCE_NOTE,
             *([MARGINAL_NOTE] if any(a.marginal for a in levers) else []),
             *([MISFIT_NOTE] if req.model_misfit else []),
             *([f"Cheapest mix: {'marginal (reached on only part of the replicas); ' if mix.marginal else ''}"
                f"its intervals are mostly from {mix.interval_source}."] if mix.interval_source else []),
             EXTRAPOLATED_NOTE, *req.notes]
    return [Table(
        key="requirements", title="What each lever needs to reach the goal",
        headers=("lever", "scale factor needed, alone (x today's error)", "Lambda reached (ratio)",
                 "cheapest mix factor (x today's error)", "cheapest mix halvings (log2 of 1/factor)",
                 "cheapest mix cost share (%)", "interval from (dominant part)", "note"),
        rows=tuple(rows), lead=lead, notes=tuple(n for n in notes if n)), *physical_tables(req.physical)]


# ---------------------------------------------------------------------------------------------
# roadmap


def _fit_source(num_replicas: int) -> str:
    return (f"best [low, high] over {num_replicas} bootstrap models of the fit" if num_replicas
            else POINT_VALUE)


def _roadmap_steps(rm: Roadmap) -> Table:
    moving = moving_components(rm)
    dg = goal_distance(rm)
    extra: list[str] = []
    rows = []
    for s in rm.steps:
        if s.extrapolation and not extra:
            extra = [f"{s.date.isoformat()}: {x}" for x in s.extrapolation]
        rows.append((s.date.isoformat(), *(num(s.scales[c]) for c in moving), *step_cells(s, dg)))
    lead = (f"From {rm.start.isoformat()} per {rm.step} at the central rates; goal: logical error per "
            f"cycle <= {num(rm.eps_target)} within {rm.max_qubits} physical qubits, judged at distance "
            f"{dg} (the largest within them). The table stops at the first step meeting the goal.",
            "Scales follow from the rates in the target file (inputs, no interval); Lambda and eps: "
            f"{_fit_source(rm.num_replicas)}, at the central rates.")
    notes = [*([f"{EXTRAPOLATED} extrapolated: outside the sampled scale range, first at {extra[0]}"]
               + extra[1:] if extra else []), *([rm.note] if rm.note else [])]
    return Table(key="roadmap", title="Roadmap: model predictions at the expected rates",
                 headers=("date", *(f"{c} scale (x today)" for c in moving), "Lambda (ratio)",
                          f"eps d={dg} (per cycle)", "distance (physical qubits)"),
                 rows=rows, lead=lead, notes=notes)


def roadmap_tables(rm: Roadmap) -> list[Table]:
    """The roadmap steps (central rates), eps at every candidate distance, and the dated events
    with their ranges."""
    eps = Table(key="roadmap_eps", title="Logical error per cycle at the candidate distances",
                headers=("date", *(f"eps d={d} (per cycle)" for d in rm.candidate_distances)),
                rows=[(s.date.isoformat(), *(rate(s.eps[d], s.eps_intervals.get(d)) for d in rm.candidate_distances))
                      for s in rm.steps],
                lead=(f"The same steps; {_fit_source(rm.num_replicas)}.",))
    dates = Table(key="roadmap_dates", title="When the goal and the Lambda milestones are met",
                  headers=("event", "date (central rates)", f"{CONFIDENCE:.0%} range (dates)",
                           "scenarios reaching it (%)"),
                  rows=event_rows(rm),
                  lead=(f"Ranges over {rm.num_scenarios} scenarios drawing the rates (their spreads) "
                        "and the fit (bootstrap models)." if rm.num_scenarios else
                        "Dates at the central rates with the best model (no spreads, no bootstrap: "
                        "no range).",))
    return [_roadmap_steps(rm), eps, dates]


# ---------------------------------------------------------------------------------------------
# sensitivity


def sensitivity_tables(sens: Sensitivity, *, lumped: Sequence[str] = ()) -> list[Table]:
    """Shares of the 1/Lambda budget at today's point, most limiting first, with their intervals;
    components without their own sweep axis (``lumped``, also in ``sens.unsampled``) read "not
    sampled" and get one row together."""
    rows = []
    for r in sens.rows:
        c = sensitivity_cells(r)
        rows.append((r.component, c["share"], c["elasticity"], c["halved"], c["perfect"], c["earlier"],
                     c["eps_halved"], c["eps_perfect"], r.note))
    if (group := group_row(sens)) is not None:
        rows.append((group[0], group[1], "—", "—", "—", "—", "—", "—",
                     "their weight is fitted together (they move only with the joint factor)"))
    source = (f"Intervals: best [low, high] over {sens.num_replicas} bootstrap models of the fit, at the "
              "central rates (the spreads of the rates are not in them)." if sens.num_replicas
              else f"Figures: {POINT_VALUE}.")
    notes = [f"Model: {sens.model_form} form; fit quality: {sens.model_quality}."]
    if sens.note:
        notes.append(sens.note)
    return [Table(
        key="sensitivity", title="Which component holds Lambda back (today's point)",
        headers=("component", "share of 1/Lambda (%)", "d ln Lambda / d ln p (elasticity)",
                 "Lambda if halved (ratio)", "Lambda if perfect (ratio)",
                 f"months earlier at +{100 * sens.faster_points:g} points of error removed per year (months)",
                 f"eps per cycle at d = {sens.distance} if halved", f"eps per cycle at d = {sens.distance} if perfect",
                 "note"),
        rows=tuple(rows),
        lead=("Lambda today from the response model: "
              f"{_with_point_note(sens.suppression_today, sens.suppression_today_interval)}; eps per cycle at "
              f"the goal distance d = {sens.distance}: "
              f"{_with_point_note(sens.eps_today, sens.eps_today_interval, is_rate=True)} (model, extrapolated "
              f"beyond the sampled distances). {source}",),
        notes=tuple(notes))]


# ---------------------------------------------------------------------------------------------
# fits


def _windows_cell(lf: LambdaFit) -> str:
    """Lambda over each run of consecutive distances, e.g. ``3-5: 1.92; 5-7: 1.70``."""
    return "; ".join(f"{w.distances[0]}-{w.distances[-1]}: {num(w.suppression.best)}" for w in lf.windows) or "—"


def _drift_cell(lf: LambdaFit) -> str:
    """Lambda's factor per step d -> d+2 with its interval, marked when the interval excludes 1."""
    if lf.drift is None:
        return "—"
    return interval(lf.drift.ratio_per_step) + (" drifts" if lf.drift.significant else "")


def fits_tables(report: FitReport) -> list[Table]:
    """Lambda per scale point (over the distances used for projection), its windows and drift
    with distance, and the threshold estimate."""
    rows = tuple((lf.axis, num(lf.factor), ",".join(map(str, lf.distances)), interval(lf.suppression),
                  interval(lf.ln_prefactor), num(lf.chi2_per_dof), _windows_cell(lf), _drift_cell(lf), lf.note)
                 for lf in report.lambdas)
    th = report.threshold
    lead = (f"Threshold (joint factor where Lambda = 1): {interval(th.factor)}; {th.note}.",)
    notes = ("distances: those the projection Lambda is fitted over (the three largest when more are sampled).",
             "windows: Lambda over each run of two and three consecutive sampled distances (best values).",
             "Lambda per d+2: how Lambda changes from d to d+2 (weighted quadratic of ln eps in (d+1)/2, "
             "1 = no drift); 'drifts': the interval excludes 1.", *report.notes)
    return [Table(
        key="fits", title="Suppression factor Lambda per scale point",
        headers=("axis", "factor (x today's error)", "distances", "Lambda (eps_d / eps_d+2)",
                 "ln A (ln per cycle)", "chi2/dof", "windows (Lambda)", "Lambda per d+2 (ratio)", "note"),
        rows=rows, lead=lead, notes=notes)]


# ---------------------------------------------------------------------------------------------
# verify

#: the report's section when verify.json was made against an earlier fit
VERIFY_STALE = ("verify.json was made against an earlier fit (more samples, or other operating "
                "points since): its numbers no longer match these answers; run `planner verify DIR` again.")


