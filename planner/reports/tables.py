"""The terminal's compact views: fits, requirements, calculator, roadmap, sensitivity, verify.

Each ``render_*`` function takes a result object and a :class:`rich.console.Console`, builds
:class:`~planner.reports.table.Table` values with the formatters of
:mod:`planner.reports.formats` (the ones the report files use, so a number reads the same in
both) and prints them with :mod:`planner.reports.terminal`. The confidence level is stated once
in each table's title; extrapolations are marked :data:`EXTRAPOLATED` and explained under the
table. The terminal views are compact (they read at 80 columns); the report files carry every
column (:mod:`planner.reports.text`).
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from planner.reports.cells import (
    event_rows,
    goal_distance,
    group_row,
    MARGINAL_NOTE,
    MISFIT_NOTE,
    lever_cells,
    mix_cells,
    source_cell,
    sensitivity_cells,
    step_cells,
)
from planner.reports.formats import CL, EXTRAPOLATED, ZERO_ERRORS, estimate, interval, num, rate
from planner.reports.jsondoc import json_text
from planner.reports.physical import render_physical
from planner.reports.table import Table
from planner.reports.terminal import footnotes, print_table, say, words
from planner.reports.verifyreport import verify_tables

if TYPE_CHECKING:
    from rich.console import Console

    from planner.fits import FitReport
    from planner.planning import CalculatorAnswer, Requirements, ResponseModel, Roadmap, Sensitivity
    from planner.planning.verify import Verification

__all__ = ["CL", "EXTRAPOLATED", "ZERO_ERRORS", "g", "iv", "json_text", "num_or_iv", "render_calculator",
           "render_fits", "render_requirements", "render_roadmap", "render_sensitivity", "render_verify", "say"]

#: the names these formatters had here (one implementation: :mod:`planner.reports.formats`)
g = num
iv = interval
num_or_iv = estimate


# ---------------------------------------------------------------------------------------------
# fits


def _task_table(report: FitReport) -> Table:
    same_rounds = all(x.rounds == x.distance for x in report.tasks)
    rows = [[x.axis, num(x.factor), str(x.distance), x.basis, *([] if same_rounds else [str(x.rounds)]),
             str(x.shots), str(x.errors), interval(x.per_cycle) + (ZERO_ERRORS if x.zero_errors else "")]
            for x in report.tasks]
    caption = ("factor: scale on today's error along the axis (1 = today); "
               + ("rounds = d for every task; " if same_rounds else "") + "eps/cycle: logical error per cycle"
               + (f"; {ZERO_ERRORS} no errors seen: the best value is the interval's upper end"
                  if any(x.zero_errors for x in report.tasks) else ""))
    return Table(title=f"Logical error per cycle per task ({CL})", left=(0, 3), rows=rows, notes=(caption,),
                 headers=("axis", "factor", "d", "basis", *([] if same_rounds else ["rounds"]), "shots",
                          "errors", "eps/cycle"))


#: marks a basis rate that is a single round count's estimate, not the decay fit's
SINGLE_ROUND_MARK = "‡"


def _basis_words(report: FitReport) -> str:
    return ("the worse of the bases (goal.basis = \"worse\")" if report.goal_basis == "worse"
            else "the mean of the bases (goal.basis = \"mean\")")


def _distance_rows(p: object, *, single: bool) -> list[list[str]]:
    """One row per basis, then the bases combined as the goal says (``"mean"`` or ``"worse"``)."""
    def cells(iv: object, zero: bool, single_iv: object, method: str) -> list[str]:
        mark = (ZERO_ERRORS if zero else "") + ("" if method == "decay" else SINGLE_ROUND_MARK)
        return [interval(iv) + mark, *([interval(single_iv)] if single else [])]

    rows = [[f.basis, *cells(f.per_cycle, f.zero_errors, f.single_round, f.method)] for f in p.per_basis]
    rows.append([p.combine, *cells(p.per_cycle, p.zero_errors, p.per_cycle_single_round, p.method)])
    return rows


def _single_header(dists: list) -> str:
    smallest = min((min(p.rounds) // p.distance for p in dists if p.rounds), default=1)
    return "r=d only" if smallest == 1 else "fewest rounds"


def _distance_notes(report: FitReport, dists: list, *, single: str | None) -> list[str]:
    notes = [f"eps/cycle from the fidelity decay 1 - 2 P_L(r) = C (1 - 2 eps)^r over the round counts, per "
             f"basis; the '{report.goal_basis}' row is what the goal and Lambda use: {_basis_words(report)}"]
    if single is not None:
        notes.append(f"{single}: the same from the smallest round count alone, as a sweep at one round count "
                     "measures it (boundary effects included)")
    if any(f.method != "decay" for p in dists for f in p.per_basis):
        notes.append(f"{SINGLE_ROUND_MARK} a single round count's estimate: fewer than two usable round counts "
                     "(zero errors, a rate near 1/2, or no decay seen; fits.json per_basis notes say which)")
    if any(p.zero_errors for p in dists):
        notes.append(f"{ZERO_ERRORS} no errors seen: the best value is the interval's upper end")
    return notes


def _distance_table(report: FitReport, *, today_only: bool) -> Table:
    """eps per cycle per (point, distance) and basis, from the decay over the round counts, with
    the bases combined as the goal says; ``today_only`` (the compact view): joint x1 only, with
    the single-round (r = d) estimate beside it."""
    dists = [p for p in report.distances if not today_only or (p.axis == "joint" and p.factor == 1.0)]
    rows = []
    for p in dists:
        lead = [str(p.distance), ",".join(map(str, p.rounds))] if today_only else [p.axis, num(p.factor), str(p.distance)]
        rows += [[*lead, *r] for r in _distance_rows(p, single=today_only)]
    single = _single_header(dists)
    notes = _distance_notes(report, dists, single=single if today_only else None)
    if today_only:
        return Table(title=f"Logical error per cycle today (joint x1) per basis ({CL})", rows=rows, notes=tuple(notes),
                     headers=("d", "rounds", "basis", "eps/cycle", single), left=(1, 2))
    return Table(title=f"Logical error per cycle per distance and basis ({CL})", rows=rows, notes=tuple(notes),
                 headers=("axis", "factor", "d", "basis", "eps/cycle"), left=(0, 3))


def _lambda_table(report: FitReport, *, tasks: bool) -> Table:
    any_note = any(lf.note for lf in report.lambdas)
    headers = ("axis", "factor", "distances", "Lambda", *(["ln A"] if tasks else []), *(["note"] if any_note else []))
    rows = [[lf.axis, num(lf.factor), ",".join(map(str, lf.distances)), interval(lf.suppression),
             *([interval(lf.ln_prefactor)] if tasks else []), *([lf.note] if any_note else [])]
            for lf in report.lambdas]
    return Table(title=f"Suppression factor Lambda per scale point ({CL})", headers=headers, rows=rows,
                 left=(0, 2, len(headers) - 1) if any_note else (0, 2),
                 notes=("Lambda = eps_d / eps_(d+2), fitted over the distances"
                        + ("; ln A: ln of the prefactor in eps_d = A Lambda^-(d+1)/2" if tasks else ""),))


def render_fits(report: FitReport, console: Console, model: ResponseModel | None = None, *,
                tasks: bool = True) -> None:
    """The fits. ``tasks=True`` (``planner fit``): every task's eps per cycle, every (point,
    distance)'s rate per basis, then Lambda per scale point with ln A; ``tasks=False``
    (``planner run``): the joint axis's rates per basis and Lambda per scale point. Both end with
    the threshold and the model's fit quality."""
    if tasks:
        print_table(console, _task_table(report))
    if report.distances:
        print_table(console, _distance_table(report, today_only=not tasks))
    print_table(console, _lambda_table(report, tasks=tasks))
    th = report.threshold
    say(console, "Threshold", "(joint factor where Lambda = 1):", interval(th.factor) + (";" if th.note else ""),
        *words(th.note))
    if model is not None:
        say(console, "Response model:", f"{model.form} form;", "fit quality:", *words(model.quality.summary()))
        if model.unsampled:
            say(console, "  not sampled (no own sweep axis, fitted together):", *words(", ".join(model.unsampled)))
    for n in report.notes:
        say(console, "note:", *words(n))


# ---------------------------------------------------------------------------------------------
# requirements


def _extra_notes(label: str, notes: tuple[str, ...]) -> list[str]:
    return [f"{EXTRAPOLATED} {label}: {x}" for x in notes]


def _lever_table(r: Requirements) -> tuple[Table, list[str]]:
    rows, notes = [], []
    levers = (r.joint, *r.components)
    sources = any(a.interval_source or a.model_misfit for a in levers)
    for a in levers:
        rows.append([a.lever, *lever_cells(a), *([source_cell(a.interval_source, a.model_misfit)] if sources else [])])
        if a.reachable and a.note:
            notes.append(f"{a.lever}: {a.note}")
        notes += _extra_notes(a.lever, a.extrapolation)
    caption = ["factor: scale on today's error (1 = today, 0.5 = half) meeting the goal with the other components "
               "as today; Lambda reached at that factor ('max': with the component perfect, the most it gives "
               "alone)"]
    if sources:
        caption.append("from: the part dominating the interval, sampling (bootstrap) or model (distance windows, "
                       "misfit), combined in quadrature")
    if any(a.marginal for a in levers):
        caption.append(MARGINAL_NOTE)
    if any(a.model_misfit for a in levers):
        caption.append(MISFIT_NOTE)
    table = Table(title=f"What each lever needs alone ({CL}, sampling + model)",
                  headers=("lever", "factor", "Lambda reached", *(["from"] if sources else [])),
                  rows=rows, notes=tuple(caption))
    return table, notes


def _today_pieces(r: Requirements) -> list[str]:
    td = r.today
    out = ["Today:", "Lambda"]
    if td.suppression_fitted:
        out.append(interval(td.suppression_fitted) + " fitted,")
    out += [estimate(td.suppression_model, td.suppression_model_interval), "model;"]
    if td.above_threshold:
        out += words("above threshold (Lambda <= 1): a larger code does not help")
        if td.distance:
            out += [f"(d = {td.distance}", *words("already meets the goal)")]
    elif td.distance is None:
        out += words("no distance meets the goal (searched to 1001)")
    else:
        budget = td.max_qubits
        where = ("within" if td.within_max_qubits else "over") + " the budget of"
        out += ["the", "goal", "needs", f"d = {estimate(td.distance, td.distance_interval)}",
                f"({td.physical_qubits} qubits)" + ("," if budget is not None else "."),
                *([*words(where), f"{budget}."] if budget else [])]
    return out


def render_requirements(answer: Requirements, console: Console) -> None:
    """Goal, what each lever needs alone, the cheapest mix, today's device, the model."""
    r = answer
    say(console, "Goal:", "eps per cycle", f"<= {num(r.eps_target)}", "at", f"d = {r.distance}",
        f"({r.physical_qubits} qubits,", *words(f"{r.distance_source})."))
    say(console, "Lambda needed at", f"d = {r.distance}", "(today's prefactor):",
        estimate(r.required_suppression, r.required_suppression_interval) + ".")
    table, notes = _lever_table(r)
    print_table(console, table)
    footnotes(console, notes)
    _render_mix(r, console)
    say(console, *_today_pieces(r))
    td = r.today
    say(console, "eps per cycle today at", f"d = {r.distance}:",
        rate(td.logical_error_per_cycle, td.logical_error_per_cycle_interval) + ".")
    render_physical(r.physical, console)
    say(console, "Model:", f"{r.model_form} form;", "fit quality:", *words(r.model_quality))
    if r.model_misfit:
        say(console, "WARNING:", *words("the response model misfits its points: every answer above is unreliable "
                                        "(marked !); intervals include the misfit"))
    for n in r.notes:
        say(console, "note:", *words(n))


def _render_mix(r: Requirements, console: Console) -> None:
    m = r.mix
    changed = m.changed() if m.reachable else []
    if not changed:
        say(console, "Cheapest mix:", *words(m.note or ("not reachable" if not m.reachable
                                                         else "nothing needs to change")))
        return
    rows = [[c, *mix_cells(m, c)] for c in changed]
    flags = [*(["marginal: reached on only part of the replicas"] if m.marginal else []),
             *([MISFIT_NOTE] if m.model_misfit else [])]
    print_table(console, Table(
        title=f"Cheapest mix: the components it changes ({CL}{', ' + m.interval_source + ' dominates' if m.interval_source else ''})"
              + (" !" if m.model_misfit else ""), rows=rows,
        headers=("component", "factor", "halvings", "cost share %"),
        notes=("minimises the sum over components of cost x halvings (log2 of 1/factor) while meeting the "
               "goal; the others stay as today", *flags)))
    say(console, "Mix total:", estimate(m.cost, m.cost_interval), "cost-weighted halvings;", "reaches",
        "Lambda", estimate(m.suppression, m.suppression_interval), "(eps per cycle", rate(m.logical_error_per_cycle),
        "at", f"d = {r.distance}).")
    footnotes(console, [*(["mix: " + m.note] if m.note else []), *_extra_notes("mix", m.extrapolation)])


def render_calculator(a: CalculatorAnswer, console: Console) -> None:
    """The answer from measured numbers (no sampling): intervals where uncertainties were given."""
    iv = a.intervals
    rows = [["Lambda", _given(a.suppression, a.suppression_sigma)],
            [f"eps per cycle at d={a.measured_distance}", _given(a.eps_measured, a.eps_sigma, rate)],
            ["target eps per cycle", rate(a.eps_target)], ["prefactor A", num(a.prefactor)],
            [f"required Lambda at d={a.measured_distance}",
             estimate(a.required_suppression, iv.get("required_suppression_factor"))],
            ["smallest distance", estimate(a.distance, iv.get("distance")) if a.reachable else "not reachable"],
            ["physical qubits (2d^2-1)", estimate(a.physical_qubits, iv.get("physical_qubits"))],
            ["eps per cycle at that distance", estimate(a.logical_error_per_cycle, iv.get("logical_error_per_cycle"))]]
    if a.qubit_budget is not None:
        met = "meets the target" if a.budget_meets_target else "misses the target"
        rows += [[f"largest distance within {a.qubit_budget:,} qubits",
                  f"{a.budget_distance} ({a.budget_physical_qubits:,} qubits)"],
                 ["eps per cycle there", f"{estimate(a.budget_logical_error_per_cycle, iv.get('budget_logical_error_per_cycle'))} ({met})"]]
    exact = a.suppression_sigma is None and a.eps_sigma is None
    notes = ["ansatz eps_d = A Lambda^-(d+1)/2; " + (
        "inputs are taken as exact (no interval; give --lambda-sigma/--eps-sigma for intervals)" if exact else
        f"{CL} from the one-sigma inputs (log-normal, independent); the ansatz itself is taken as exact")]
    if not exact and a.reachable_fraction is not None and a.reachable_fraction < 1:
        notes.append(f"the target is reachable in {a.reachable_fraction:.0%} of draws of the inputs")
    print_table(console, Table(title="From measured numbers (no sampling)", headers=("quantity", "value"), rows=rows,
                               notes=tuple(notes)))
    if a.note:
        say(console, *words(a.note))


def _given(value: float, sigma: float | None, fmt: Any = None) -> str:
    shown = (fmt or num)(value)
    return shown if sigma is None else f"{shown} +- {(fmt or num)(sigma)} (1 sigma)"


# ---------------------------------------------------------------------------------------------
# roadmap


def _steps_table(rm: Roadmap) -> tuple[Table, list[str]]:
    d = goal_distance(rm)
    rows: list[list[str]] = []
    notes: list[str] = []
    for s in rm.steps:
        if s.extrapolation and not notes:
            notes = _extra_notes(str(s.date), s.extrapolation)
        rows.append([str(s.date), *step_cells(s, d)])
    fit_cl = f"{CL} from the fit" if rm.num_replicas else "best values"
    table = Table(title=f"Roadmap from {rm.start}, per {rm.step}, at the central rates ({fit_cl})",
                  headers=("date", "Lambda", f"eps/cycle d={d}", "d (qubits)"), rows=rows,
                  notes=(f"eps/cycle: logical error per cycle at d = {d}, the largest within {rm.max_qubits} "
                         f"qubits; d (qubits): smallest distance meeting eps <= {num(rm.eps_target)}; the "
                         "table stops at the first step meeting it",))
    return table, notes[:1] + ([f"  ({EXTRAPOLATED} marks every such row)"] if notes else [])


def render_roadmap(rm: Roadmap, console: Console) -> None:
    """Terminal form: date, Lambda, eps at the goal distance, the smallest distance meeting the
    goal; then the dates. Per-component scales are in the JSON and the report files."""
    table, notes = _steps_table(rm)
    print_table(console, table)
    footnotes(console, notes)
    print_table(console, Table(
        title=f"Dates ({CL} over {rm.num_scenarios} scenarios of rates and fits)",
        headers=("event", "date", "range", "reached"), rows=event_rows(rm),
        notes=("date at the central rates; reached: share of scenarios meeting it within the horizon",)))
    if rm.note:
        say(console, "note:", *words(rm.note))


# ---------------------------------------------------------------------------------------------
# sensitivity


def render_sensitivity(sens: Sensitivity, console: Console) -> None:
    """Per component, most limiting first; elasticity is its own column only where it is not
    simply -share (the quadratic form)."""
    quad = sens.model_form != "linear"
    columns = ("share", *(["elasticity"] if quad else []), "halved", "perfect", "earlier")
    rows = [[r.component, *(c[k] for k in columns)] for r in sens.rows for c in [sensitivity_cells(r)]]
    if (group := group_row(sens, short=True)) is not None:
        rows.append([group[0], group[1], *["—"] * (len(columns) - 1)])
    cl = f"{CL}, bootstrap" if sens.num_replicas else "best values, no bootstrap"
    say(console, "Lambda today (model):", estimate(sens.suppression_today, sens.suppression_today_interval) + ".")
    print_table(console, Table(
        title=f"Sensitivity at today's point, most limiting first ({cl})", rows=rows,
        headers=("component", "share %", *(["elasticity"] if quad else []), "halved", "perfect", "earlier"),
        notes=("share: part of 1/Lambda; "
               + ("elasticity: d ln Lambda / d ln p; " if quad else
                  "elasticity d ln Lambda / d ln p = -share (linear form); ")
               + "halved, perfect: Lambda with that component's error halved or removed; earlier: months the "
               f"goal comes sooner if its error fell {sens.faster_points:.0%} more per year",),
        fold_titles=(f"Months earlier to the goal, per component ({cl})",)))
    footnotes(console, [f"{r.component}: {r.note}" for r in sens.rows if r.note and r.sampled])
    _render_goal_eps(sens, console, cl)
    say(console, "Model:", f"{sens.model_form} form;", "fit quality:", *words(sens.model_quality))
    if sens.note:
        say(console, "note:", *words(sens.note))


def _render_goal_eps(sens: Sensitivity, console: Console, cl: str) -> None:
    """eps per cycle at the goal distance with each component halved or perfect."""
    if sens.distance is not None:
        print_table(console, Table(
            title=f"At the goal distance d = {sens.distance}: eps per cycle with one component improved ({cl})",
            headers=("component", "halved", "perfect"),
            rows=[[r.component, c["eps_halved"], c["eps_perfect"]] for r in sens.rows if r.sampled
                  for c in [sensitivity_cells(r)]],
            notes=(f"today: {rate(sens.eps_today, sens.eps_today_interval)} at d = {sens.distance} (model; "
                   "an extrapolation beyond the sampled distances)",)))


# ---------------------------------------------------------------------------------------------
# verify


def render_verify(v: Verification, console: Console) -> None:
    """The verification tables of the report (:func:`planner.reports.verifyreport.verify_tables`)."""
    for t in verify_tables(v):
        print_table(console, t)
