"""Rich tables for the terminal: fits, requirements, calculator, roadmap, sensitivity, verify.

Each function takes a result object and a :class:`rich.console.Console`. The confidence level is
stated once in each table's title; intervals read "best [low, high]"; extrapolations are marked.
"""

from __future__ import annotations

import math
from typing import Any

from rich.console import Console
from rich.table import Table

from planner.fits import CONFIDENCE, FitReport, Interval

CL = f"{CONFIDENCE:.0%} intervals"


def g(x: float | None, digits: int = 3) -> str:
    """Short number: '—' for None, 'inf' for infinity."""
    if x is None:
        return "—"
    if isinstance(x, float) and math.isinf(x):
        return "inf"
    return f"{x:.{digits}g}"


def iv(i: Interval | None, digits: int = 3) -> str:
    if i is None:
        return "—"
    return f"{g(i.best, digits)} [{g(i.low, digits)}, {g(i.high, digits)}]"


def render_fits(report: FitReport, console: Console, model: Any = None) -> None:
    t = Table(title=f"Logical error per cycle per task ({CL})")
    for h in ("axis", "factor", "d", "basis", "rounds", "shots", "errors", "eps per cycle"):
        t.add_column(h, justify="right" if h not in ("axis", "basis") else "left")
    for x in report.tasks:
        t.add_row(x.axis, g(x.factor), str(x.distance), x.basis, str(x.rounds), str(x.shots), str(x.errors),
                  iv(x.per_cycle) + (" (0 errors: upper end)" if x.zero_errors else ""))
    console.print(t)
    t = Table(title=f"Suppression factor Lambda per scale point ({CL})")
    for h in ("axis", "factor", "distances", "Lambda", "ln A", "note"):
        t.add_column(h)
    for lf in report.lambdas:
        t.add_row(lf.axis, g(lf.factor), ",".join(map(str, lf.distances)), iv(lf.suppression),
                  iv(lf.ln_prefactor), lf.note)
    console.print(t)
    th = report.threshold
    console.print(f"Threshold (joint factor where Lambda = 1, {CL}): {iv(th.factor)}  {th.note}")
    if model is not None:
        console.print(f"Response model: {model.form} form; fit quality: {model.quality.summary()}")
        if model.unsampled:
            console.print("  lumped (no own axis): " + ", ".join(model.unsampled))
    for n in report.notes:
        console.print(f"note: {n}")


def _extra(notes: tuple[str, ...]) -> str:
    return ("EXTRAPOLATED: " + "; ".join(notes)) if notes else ""


def render_requirements(answer: Any, console: Console) -> None:
    r = answer
    console.print(f"Goal: eps per cycle <= {g(r.eps_target)} at distance {r.distance} "
                  f"({r.physical_qubits} qubits, {r.distance_source}); required Lambda "
                  f"(today's prefactor) {g(r.required_suppression)}")
    t = Table(title=f"What each lever needs (scale factor on today's error; {CL} from bootstrap)")
    for h in ("lever", "factor needed", "Lambda reached", "note"):
        t.add_column(h)
    rows = [r.joint, *r.components]
    for a in rows:
        factor = (iv(a.factor_interval) if a.factor_interval else g(a.factor)) if a.reachable else "not reachable alone" \
            if a.lever != "joint" else "not reachable"
        t.add_row(a.lever, factor, g(a.suppression), "; ".join(x for x in (a.note, _extra(a.extrapolation)) if x))
    console.print(t)
    m = r.mix
    t = Table(title="Cheapest mix (minimises sum cost x halvings; exact on the model)")
    for h in ("component", "factor"):
        t.add_column(h)
    for c, s in m.scales.items():
        t.add_row(c, g(s))
    console.print(t)
    console.print(f"  cost {g(m.cost)} weighted halvings; Lambda {g(m.suppression)}; eps "
                  f"{g(m.logical_error_per_cycle)}  {m.note} {_extra(m.extrapolation)}")
    td = r.today
    dist = (iv(td.distance_interval, 4) if td.distance_interval else g(td.distance)) if td.distance else "—"
    console.print(f"Today's device: Lambda {iv(td.suppression_fitted)} fitted ({CL}), "
                  f"{g(td.suppression_model)} model; smallest distance meeting the goal {dist} "
                  f"({td.physical_qubits or '—'} qubits) {td.note}")
    console.print(f"Model: {r.model_form} form; fit quality: {r.model_quality}")
    for n in r.notes:
        console.print(f"note: {n}")


def render_calculator(a: Any, console: Console) -> None:
    t = Table(title="From measured numbers (ansatz eps_d = A Lambda^-(d+1)/2; no sampling)")
    t.add_column("quantity")
    t.add_column("value", justify="right")
    for k, v in (("Lambda", g(a.suppression)), (f"eps per cycle at d={a.measured_distance}", g(a.eps_measured)),
                 ("target eps per cycle", g(a.eps_target)), ("prefactor A", g(a.prefactor)),
                 (f"required Lambda at d={a.measured_distance}", g(a.required_suppression)),
                 ("smallest distance", g(a.distance) if a.reachable else "not reachable"),
                 ("physical qubits (2d^2-1)", g(a.physical_qubits, 6)),
                 ("eps per cycle at that distance", g(a.logical_error_per_cycle))):
        t.add_row(k, v)
    console.print(t)
    if a.note:
        console.print(a.note)


def render_roadmap(rm: Any, console: Console) -> None:
    t = Table(title=f"Roadmap from {rm.start} (per {rm.step}; model predictions at the central rates)")
    t.add_column("date")
    moving = [c for c in rm.steps[0].scales if any(s.scales[c] != 1.0 for s in rm.steps)]
    for c in moving:
        t.add_column(f"{c} scale", justify="right")
    t.add_column("Lambda", justify="right")
    for d in rm.candidate_distances:
        t.add_column(f"eps/cycle d={d}", justify="right")
    t.add_column("distance (qubits)", justify="right")
    for s in rm.steps:
        t.add_row(str(s.date), *[g(s.scales[c], 2) for c in moving], g(s.suppression),
                  *[g(s.eps[d], 2) for d in rm.candidate_distances],
                  f"{s.distance} ({s.physical_qubits})" if s.distance else "—")
    console.print(t)
    t = Table(title=f"Dates ({CL} over {rm.num_scenarios} scenarios of rates and fits)")
    for h in ("event", "date", "range", "scenarios reaching it"):
        t.add_column(h)
    for e in (rm.goal, *rm.milestones):
        rng = f"[{e.low or '—'}, {e.high or 'beyond horizon'}]" if rm.num_scenarios else "—"
        t.add_row(e.what, str(e.date) if e.date else "not within horizon", rng,
                  f"{e.fraction_reached:.0%}" if rm.num_scenarios else "—")
    console.print(t)
    if rm.note:
        console.print(f"note: {rm.note}")


def render_sensitivity(sens: Any, console: Console) -> None:
    t = Table(title=f"Sensitivity at today's point (Lambda {g(sens.suppression_today)}, model; most limiting first)")
    for h in ("component", "share of 1/Lambda", "dlnLambda/dlnp", "Lambda if halved", "Lambda if perfect",
              f"months earlier (+{sens.faster_points:.0%}/yr)", "note"):
        t.add_column(h)
    for r in sens.rows:
        t.add_row(r.component, f"{r.share:.1%}", f"{r.elasticity:.3f}", g(r.suppression_halved),
                  g(r.suppression_perfect), g(r.months_earlier, 2), r.note)
    console.print(t)
    console.print(f"Model: {sens.model_form} form; fit quality: {sens.model_quality} {sens.note}")


def render_verify(v: Any, console: Console) -> None:
    t = Table(title=f"Verification: predicted vs sampled ({CL})")
    for h in ("point", "quantity", "d", "predicted", "sampled", "holds"):
        t.add_column(h)
    for r in v.rows:
        q = "eps per cycle" if r.quantity == "logical_error_per_cycle" else "Lambda"
        sampled = iv(r.sampled) + (" (0 errors: bound)" if r.zero_errors else "")
        t.add_row(r.label, q, g(r.distance), iv(r.predicted), sampled,
                  {True: "holds", False: "DIFFERS", None: "—"}[r.holds])
    console.print(t)
    if v.note:
        console.print(f"note: {v.note}")


def json_text(obj: Any) -> str:
    """One JSON document; non-finite floats become null (JSON has no inf/nan)."""
    import json

    def clean(x: Any) -> Any:
        if isinstance(x, float) and not math.isfinite(x):
            return None
        if isinstance(x, dict):
            return {str(k): clean(v) for k, v in x.items()}
        if isinstance(x, list | tuple):
            return [clean(v) for v in x]
        return x

    return json.dumps(clean(obj), allow_nan=False)
