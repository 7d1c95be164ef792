"""Rich tables for the terminal: fits, requirements, calculator, roadmap, sensitivity, verify.

Each function takes a result object and a :class:`rich.console.Console`. The confidence level is
stated once in each table's title; intervals read "best [low, high]"; extrapolations are marked
:data:`EXTRAPOLATED` and explained under the table.

Layout rule: a number is never split over two lines. Number columns do not wrap; a table wider
than the console is folded into consecutive tables that repeat the first column, and prose
lines are packed from unbreakable pieces. So the tables read at 80 columns (a pipe or a CI log)
and use the room when there is more.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from typing import Any

from rich import box
from rich.cells import cell_len
from rich.console import Console
from rich.table import Table
from rich.text import Text

from planner.fits import CONFIDENCE, FitReport, Interval
from planner.reports.text import BEYOND, TINY, UNDERFLOW, overflow_notes

CL = f"{CONFIDENCE:.0%} intervals"
EXTRAPOLATED = "†"
ZERO_ERRORS = "*"
#: columns are separated by this many spaces (rich: collapsed padding of 1 plus the divider)
GAP = 2


def g(x: float | None, digits: int = 3) -> str:
    """Short number: '—' for None, nan or -infinity, 'beyond any reachable' for infinity; no '-0'.

    >>> g(0.000123456), g(None), g(float("inf")), g(-0.0), g(-1e-9, 0), g(2449.0, 6)
    ('0.000123', '—', 'beyond any reachable', '0', '0', '2449')
    """
    if x is None or (isinstance(x, float) and math.isnan(x)) or x == -math.inf:
        return "—"
    if isinstance(x, float) and math.isinf(x):
        return BEYOND
    text = f"{x + 0.0:.{max(digits, 1)}g}" if digits else f"{x + 0.0:.0f}"
    return "0" if text in ("-0", "0") else text


def _degenerate(*cells: str) -> bool:
    return len(set(cells)) == 1 and cells[0] in ("0", "—", BEYOND, UNDERFLOW)


def iv(i: Interval | None, digits: int = 3, *, scale: float = 1.0, is_rate: bool = False) -> str:
    """``best [low, high]`` (each divided by ``scale``); '—' for None; one cell, never
    '0 [0, 0]', when the interval is degenerate; ``is_rate``: values below
    :data:`~planner.reports.text.TINY` are an underflow.

    >>> iv(Interval(low=0.000557, best=0.000593, high=0.000631), scale=1e-3), iv(Interval(low=0.0, best=0.0, high=0.0), is_rate=True)
    ('0.593 [0.557, 0.631]', '< 1e-300')
    """
    if i is None:
        return "—"
    cells = tuple(rate_g(x, scale=scale, digits=digits) if is_rate else g(x / scale, digits)
                  for x in (i.best, i.low, i.high))
    return cells[0] if _degenerate(*cells) else f"{cells[0]} [{cells[1]}, {cells[2]}]"


def rate_g(x: float | None, *, scale: float = 1.0, digits: int = 3) -> str:
    """A logical error rate (divided by ``scale``): below TINY it is an underflow, not zero."""
    if x is not None and math.isfinite(x) and 0 <= x < TINY:
        return UNDERFLOW
    return g(None if x is None else x / scale, digits)


def num_or_iv(best: float | None, i: Interval | None, digits: int = 3, *, is_rate: bool = False) -> str:
    if i is not None:
        return iv(i, digits, is_rate=is_rate)
    return rate_g(best, digits=digits) if is_rate else g(best, digits)


def unit_of(values: Iterable[float | None]) -> float:
    """A power of ten for a column of small rates: the largest value reads between 1 and 10.

    >>> unit_of([0.0085, 0.00015, None]), unit_of([]), unit_of([0.5])
    (0.001, 1.0, 0.1)
    """
    vals = [abs(v) for v in values if v is not None and math.isfinite(v) and v != 0]
    return 10.0 ** math.floor(math.log10(max(vals))) if vals else 1.0


def unit_label(unit: float) -> str:
    """'' for 1, else the column's multiplier, e.g. '×1e-3'."""
    return "" if unit == 1.0 else f"×1e{round(math.log10(unit))}"


def _pct(i: Interval | None, best: float, digits: int = 3) -> str:
    """A fraction as a percentage (``digits`` significant digits) with its interval.

    >>> _pct(Interval(low=0.4, best=0.429, high=0.459), 0.429, 2), _pct(None, 0.048)
    ('43 [40, 46]', '4.8')
    """
    return iv(i.map(lambda x: 100 * x), digits) if i is not None else g(100 * best, digits)


# ---------------------------------------------------------------------------------------------
# layout


def say(console: Console, *pieces: str, indent: int = 2, style: str = "", notes: bool = True) -> None:
    """Print ``pieces`` (each never split) joined by spaces, packed into lines of the console's
    width; continuation lines are indented. With ``notes``, a line showing an overflow or an
    underflow is followed by the note that explains it."""
    width = max(console.width, 20)
    lines: list[str] = []
    cur = ""
    for p in (x for x in pieces if x):
        cand = f"{cur} {p}" if cur else p
        if cur and cell_len(cand) > width:
            lines.append(cur)
            cur = " " * indent + p
        else:
            cur = cand
    if cur:
        lines.append(cur)
    for line in lines:
        console.print(Text(line, style=style), soft_wrap=True)
    if notes:
        for n in overflow_notes(pieces):
            say(console, *_words(n), indent=4, notes=False)


def emit(console: Console, title: str, headers: Sequence[str], rows: Sequence[Sequence[str]], *,
         left: Sequence[int] = (0,), caption: str | None = None, key: int = 1,
         fold_titles: Sequence[str] = ()) -> None:
    """One table, or (if wider than the console) several that repeat the first ``key`` columns
    (titled from ``fold_titles`` where given, else "<title> (continued)").

    Cells never wrap: each column is as wide as its widest cell or header. ``left``: indices of
    left-justified columns (the others are numbers, right-justified). Title and caption are
    printed as lines of the console's width (rich would squeeze them to the table's).
    """
    n = len(headers)
    widths = [max([cell_len(headers[j]), *(cell_len(r[j]) for r in rows)]) for j in range(n)]
    groups: list[list[int]] = []
    base = sum(widths[:key]) + GAP * key
    cur: list[int] = []
    for j in range(key, n):
        if cur and base + sum(widths[k] + GAP for k in cur) + widths[j] > console.width:
            groups.append(cur)
            cur = []
        cur.append(j)
    groups.append(cur)
    notes = overflow_notes([*rows, caption or ""])
    if notes:  # say what "beyond any reachable" / "< 1e-300" mean under the table
        caption = "; ".join([*([caption] if caption else []), *notes])
    for gi, cols in enumerate(groups):
        idx = [*range(key), *cols]
        console.print()
        sub = fold_titles[gi - 1] if 0 < gi <= len(fold_titles) else f"{title} (continued)"
        say(console, *_words(title if gi == 0 else sub), style="bold", notes=False)
        t = Table(box=box.SIMPLE_HEAD, show_edge=False, pad_edge=False, collapse_padding=True)
        for j in idx:
            t.add_column(Text(headers[j]), justify="left" if j in left else "right", no_wrap=True,
                         min_width=widths[j])
        for r in rows:
            t.add_row(*(Text(r[j]) for j in idx))
        console.print(t)
    if caption:
        say(console, *_words(caption), notes=False)


def footnotes(console: Console, notes: Iterable[str]) -> None:
    for n in notes:
        if n:
            say(console, *n.split(" "), indent=4)


def _words(text: str) -> list[str]:
    return text.split(" ")


# ---------------------------------------------------------------------------------------------
# fits


def render_fits(report: FitReport, console: Console, model: Any = None, *, tasks: bool = True) -> None:
    """The fits. ``tasks=True`` (``planner fit``): every task's eps per cycle, then Lambda per scale
    point with ln A; ``tasks=False`` (``planner run``): Lambda per scale point only. Both end with
    the threshold and the model's fit quality."""
    if tasks:
        unit = unit_of(x.per_cycle.high for x in report.tasks)
        same_rounds = all(x.rounds == x.distance for x in report.tasks)
        headers = ["axis", "factor", "d", "basis", *([] if same_rounds else ["rounds"]), "shots", "errors",
                   f"eps/cycle {unit_label(unit)}".strip()]
        rows = [[x.axis, g(x.factor), str(x.distance), x.basis, *([] if same_rounds else [str(x.rounds)]),
                 str(x.shots), str(x.errors), iv(x.per_cycle, scale=unit) + (ZERO_ERRORS if x.zero_errors else "")]
                for x in report.tasks]
        caption = ("factor: scale on today's error along the axis (1 = today); "
                   + ("rounds = d for every task; " if same_rounds else "")
                   + (f"eps/cycle: logical error per cycle {unit_label(unit)}; " if unit != 1 else "")
                   + (f"{ZERO_ERRORS} no errors seen: the best value is the interval's upper end"
                      if any(x.zero_errors for x in report.tasks) else ""))
        emit(console, f"Logical error per cycle per task ({CL})", headers, rows, left=(0, 3),
             caption=caption.rstrip("; "))
    any_note = any(lf.note for lf in report.lambdas)
    headers = ["axis", "factor", "distances", "Lambda", *(["ln A"] if tasks else []), *(["note"] if any_note else [])]
    rows = [[lf.axis, g(lf.factor), ",".join(map(str, lf.distances)), iv(lf.suppression),
             *([iv(lf.ln_prefactor)] if tasks else []), *([lf.note] if any_note else [])] for lf in report.lambdas]
    emit(console, f"Suppression factor Lambda per scale point ({CL})", headers, rows,
         left=(0, 2, len(headers) - 1) if any_note else (0, 2),
         caption="Lambda = eps_d / eps_(d+2), fitted over the distances"
         + ("; ln A: ln of the prefactor in eps_d = A Lambda^-(d+1)/2" if tasks else ""))
    th = report.threshold
    say(console, "Threshold", "(joint factor where Lambda = 1):", iv(th.factor) + (";" if th.note else ""),
        *_words(th.note))
    if model is not None:
        say(console, "Response model:", f"{model.form} form;", "fit quality:", *model.quality.summary().split(" "))
        if model.unsampled:
            say(console, "  lumped (no own axis):", *", ".join(model.unsampled).split(" "))
    for n in report.notes:
        say(console, "note:", *_words(n))


# ---------------------------------------------------------------------------------------------
# requirements


def _extra_notes(label: str, notes: Sequence[str]) -> list[str]:
    return [f"{EXTRAPOLATED} {label}: {x}" for x in notes]


def render_requirements(answer: Any, console: Console) -> None:
    """Goal, what each lever needs alone, the cheapest mix, today's device, the model."""
    r = answer
    say(console, "Goal:", "eps per cycle", f"<= {g(r.eps_target)}", "at", f"d = {r.distance}",
        f"({r.physical_qubits} qubits,", *f"{r.distance_source}).".split(" "))
    say(console, "Lambda needed at", f"d = {r.distance}", "(today's prefactor):",
        num_or_iv(r.required_suppression, r.required_suppression_interval) + ".")
    rows, notes = [], []
    for a in (r.joint, *r.components):
        if a.reachable:
            factor = num_or_iv(a.factor, a.factor_interval) + (f" {EXTRAPOLATED}" if a.extrapolation else "")
            lam = num_or_iv(a.suppression, a.suppression_interval)
            if a.note:
                notes.append(f"{a.lever}: {a.note}")
        else:
            factor = "not reachable"
            lam = "max " + num_or_iv(a.suppression, a.suppression_interval) if a.lever != "joint" else "—"
        rows.append([a.lever, factor, lam])
        notes += _extra_notes(a.lever, a.extrapolation)
    emit(console, f"What each lever needs alone ({CL}, bootstrap)", ["lever", "factor", "Lambda reached"], rows,
         caption="factor: scale on today's error (1 = today, 0.5 = half) meeting the goal with the other "
         "components as today; Lambda reached at that factor ('max': with the component perfect, the "
         "most it gives alone)")
    footnotes(console, notes)
    _render_mix(r, console)
    td = r.today
    today = ["Today:", "Lambda", num_or_iv(td.suppression_fitted.best, td.suppression_fitted) + " fitted,"] \
        if td.suppression_fitted else ["Today:", "Lambda"]
    today += [num_or_iv(td.suppression_model, td.suppression_model_interval), "model;"]
    if td.above_threshold:
        today += ["above", "threshold", "(Lambda <= 1):", "a", "larger", "code", "does", "not", "help"]
        if td.distance:
            today += [f"(d = {td.distance}", "already", "meets", "the", "goal)"]
    elif td.distance is None:
        today += ["no", "distance", "meets", "the", "goal", "(searched", "to", "1001)"]
    else:
        dist = num_or_iv(td.distance, td.distance_interval, 4)
        budget = td.max_qubits
        where = ("within" if td.within_max_qubits else "over") + " the budget of"
        today += ["the", "goal", "needs", f"d = {dist}", f"({td.physical_qubits} qubits)"
                  + ("," if budget is not None else "."), *([*where.split(" "), f"{budget}."] if budget else [])]
    say(console, *today)
    say(console, "eps per cycle today at", f"d = {r.distance}:",
        num_or_iv(td.logical_error_per_cycle, td.logical_error_per_cycle_interval, is_rate=True) + ".")
    say(console, "Model:", f"{r.model_form} form;", "fit quality:", *r.model_quality.split(" "))
    for n in r.notes:
        say(console, "note:", *_words(n))


def _render_mix(r: Any, console: Console) -> None:
    m = r.mix
    if not m.reachable:
        say(console, "Cheapest mix:", *_words(m.note or "not reachable"))
        return
    changed = m.changed()
    if not changed:
        say(console, "Cheapest mix:", *_words(m.note or "nothing needs to change"))
        return
    rows = []
    for c in changed:
        f_iv = m.scale_intervals.get(c)
        h_iv = f_iv.map(lambda s: -math.log2(s) if s > 0 else math.inf) if f_iv else None
        # -log2 is decreasing: the factor's high end is the halvings' low end
        h_iv = Interval(low=h_iv.high, best=h_iv.best, high=h_iv.low) if h_iv else None
        mark = f" {EXTRAPOLATED}" if any(x.startswith(f"{c} ") for x in m.extrapolation) else ""
        rows.append([c, num_or_iv(m.scales[c], f_iv) + mark, num_or_iv(-math.log2(m.scales[c]), h_iv),
                     _pct(m.cost_share_intervals.get(c), m.cost_shares.get(c, 0.0))])
    emit(console, f"Cheapest mix: the components it changes ({CL})", ["component", "factor", "halvings",
                                                                        "cost share %"], rows,
         caption="minimises the sum over components of cost x halvings (log2 of 1/factor) while meeting "
         "the goal; the others stay as today")
    say(console, "Mix total:", num_or_iv(m.cost, m.cost_interval), "cost-weighted halvings;", "reaches",
        "Lambda", num_or_iv(m.suppression, m.suppression_interval), "(eps per cycle", rate_g(m.logical_error_per_cycle),
        "at", f"d = {r.distance}).")
    footnotes(console, [*(["mix: " + m.note] if m.note else []), *_extra_notes("mix", m.extrapolation)])


def render_calculator(a: Any, console: Console) -> None:
    rows = [["Lambda", g(a.suppression)], [f"eps per cycle at d={a.measured_distance}", rate_g(a.eps_measured)],
            ["target eps per cycle", rate_g(a.eps_target)], ["prefactor A", g(a.prefactor)],
            [f"required Lambda at d={a.measured_distance}", g(a.required_suppression)],
            ["smallest distance", g(a.distance) if a.reachable else "not reachable"],
            ["physical qubits (2d^2-1)", g(a.physical_qubits, 6)],
            ["eps per cycle at that distance", rate_g(a.logical_error_per_cycle)]]
    emit(console, "From measured numbers (no sampling)", ["quantity", "value"], rows,
         caption="ansatz eps_d = A Lambda^-(d+1)/2; inputs are taken as exact (no interval)")
    if a.note:
        say(console, *_words(a.note))


# ---------------------------------------------------------------------------------------------
# roadmap


def render_roadmap(rm: Any, console: Console) -> None:
    """Terminal form: date, Lambda, eps at the goal distance, the smallest distance meeting the
    goal; then the dates. Per-component scales are in the JSON and the report files."""
    d = rm.goal_distance if rm.goal_distance in rm.candidate_distances else rm.candidate_distances[-1]
    unit = unit_of(s.eps[d] for s in rm.steps)
    rows, notes = [], []
    for s in rm.steps:
        mark = f" {EXTRAPOLATED}" if s.extrapolation else ""
        if s.extrapolation and not notes:
            notes = _extra_notes(str(s.date), s.extrapolation)
        e = s.eps_intervals.get(d)
        rows.append([str(s.date), num_or_iv(s.suppression, s.suppression_interval) + mark,
                     iv(e, scale=unit, is_rate=True) if e else rate_g(s.eps[d], scale=unit),
                     f"{s.distance} ({s.physical_qubits})" if s.distance else "—"])
    fit_cl = f"{CL} from the fit" if rm.num_replicas else "best values"
    emit(console, f"Roadmap from {rm.start}, per {rm.step}, at the central rates ({fit_cl})",
         ["date", "Lambda", f"eps/cycle d={d} {unit_label(unit)}".strip(), "d (qubits)"], rows,
         caption=f"eps/cycle: logical error per cycle at d = {d}, the largest within {rm.max_qubits} qubits"
         + (f", {unit_label(unit)}" if unit != 1 else "") + "; d (qubits): smallest distance meeting "
         f"eps <= {g(rm.eps_target)}; the table stops at the first step meeting it")
    footnotes(console, notes[:1] + ([f"  ({EXTRAPOLATED} marks every such row)"] if notes else []))
    rows = []
    for e in (rm.goal, *rm.milestones):
        rng = f"[{e.low or 'before start'}, {e.high or 'beyond horizon'}]" if rm.num_scenarios else "—"
        rows.append([e.what, str(e.date) if e.date else "not within horizon", rng,
                     f"{e.fraction_reached:.0%}" if rm.num_scenarios else "—"])
    emit(console, f"Dates ({CL} over {rm.num_scenarios} scenarios of rates and fits)",
         ["event", "date", "range", "reached"], rows, left=(0,),
         caption="date at the central rates; reached: share of scenarios meeting it within the horizon")
    if rm.note:
        say(console, "note:", *_words(rm.note))


# ---------------------------------------------------------------------------------------------
# sensitivity


def render_sensitivity(sens: Any, console: Console) -> None:
    """Per component, most limiting first; elasticity is its own column only where it is not
    simply -share (the quadratic form)."""
    quad = sens.model_form != "linear"
    rows = []
    for r in sens.rows:
        ivs = r.intervals
        rows.append([r.component, _pct(ivs.get("share"), r.share, 2),
                     *([num_or_iv(r.elasticity, ivs.get("elasticity"))] if quad else []),
                     num_or_iv(r.suppression_halved, ivs.get("suppression_halved")),
                     num_or_iv(r.suppression_perfect, ivs.get("suppression_perfect")),
                     num_or_iv(r.months_earlier, ivs.get("months_earlier"), 2)])
    cl = f"{CL}, bootstrap" if sens.num_replicas else "best values, no bootstrap"
    say(console, "Lambda today (model):", num_or_iv(sens.suppression_today, sens.suppression_today_interval) + ".")
    emit(console, f"Sensitivity at today's point, most limiting first ({cl})",
         ["component", "share %", *(["elasticity"] if quad else []), "halved", "perfect", "earlier"], rows,
         caption="share: part of 1/Lambda; "
         + ("elasticity: d ln Lambda / d ln p; " if quad else "elasticity d ln Lambda / d ln p = -share (linear form); ")
         + "halved, perfect: Lambda with that component's error halved or removed; earlier: months the goal "
         f"comes sooner if its error fell {sens.faster_points:.0%} more per year",
         fold_titles=(f"Months earlier to the goal, per component ({cl})",))
    footnotes(console, [f"{r.component}: {r.note}" for r in sens.rows if r.note])
    say(console, "Model:", f"{sens.model_form} form;", "fit quality:", *sens.model_quality.split(" "))
    if sens.note:
        say(console, "note:", *_words(sens.note))


# ---------------------------------------------------------------------------------------------
# verify


def render_verify(v: Any, console: Console) -> None:
    rows = []
    for r in v.rows:
        q = "eps/cycle" if r.quantity == "logical_error_per_cycle" else "Lambda"
        sampled = iv(r.sampled) + (ZERO_ERRORS if r.zero_errors else "")
        rows.append([r.label, q, g(r.distance), iv(r.predicted, is_rate=q == "eps/cycle"), sampled,
                     {True: "holds", False: "DIFFERS", None: "—"}[r.holds]])
    emit(console, f"Verification: predicted vs sampled ({CL})", ["point", "quantity", "d", "predicted",
                                                                   "sampled", "holds"], rows, left=(0, 1), key=3,
         caption="holds: the two intervals overlap"
         + (f"; {ZERO_ERRORS} no errors sampled: a bound" if any(r.zero_errors for r in v.rows) else ""))
    if v.note:
        say(console, "note:", *_words(v.note))


def json_text(obj: Any) -> str:
    """One JSON document; non-finite floats become null (JSON has no inf/nan)."""
    import json

    from planner.reports.text import json_safe

    return json.dumps(json_safe(obj), allow_nan=False)
