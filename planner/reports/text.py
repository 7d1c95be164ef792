"""Report tables as text cells: one layout shared by the Markdown files and the HTML page, so a
number reads the same wherever a person meets it.

Builders take the planning result objects and return :class:`TextTable` values; renderers
(:func:`to_markdown` here, :mod:`planner.reports.html`) only lay them out. Numbers use
:func:`num` (4 significant digits); intervals read ``best [low, high]`` at
:data:`~planner.fits.CONFIDENCE`, stated once per document (:data:`INTERVAL_NOTE`).

Values no float can show are never printed as ``inf``, ``nan``, ``-0`` or a zero interval
``0 [0, 0]``: infinity reads :data:`BEYOND`, nan reads '—', a rate below :data:`TINY` (an
underflow: the model's rates are never exactly zero) reads :data:`UNDERFLOW`; the renderers add
:func:`overflow_notes` under a table that shows either.

>>> num(0.000123456), num(None), num(float("inf")), num(-0.0), span(1.5, 1.25, 1.75)
('0.0001235', '—', 'beyond any reachable', '0', '1.5 [1.25, 1.75]')
>>> span(0.0, 0.0, 0.0), rate(0.0), rate(1e-320, Interval(low=0.0, best=1e-320, high=2e-320)), rate(2e-3)
('0', '< 1e-300', '< 1e-300', '0.002')
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from typing import Any

from planner.fits import CONFIDENCE, FitReport, Interval

INTERVAL_NOTE = (f"Intervals read best [low, high] at {CONFIDENCE:.0%} confidence (likelihood ratio for "
                 "fitted rates and Lambda, bootstrap for answers derived from the model).")
#: the one-line caveat under every table
CAVEAT = "Model-based projection from simulated circuits: check it against the device."
#: marks a value outside the sampled scale range
EXTRAPOLATED = "†"
EXTRAPOLATED_NOTE = f"{EXTRAPOLATED} extrapolated: outside the sampled scale range (the note says how far)."


#: printed for an infinite value (an overflow: e.g. a Lambda with a component perfect, a factor
#: or a distance no finite improvement reaches)
BEYOND = "beyond any reachable"
#: rates (logical error per cycle) below this are an underflow of the model's formula
TINY = 1e-300
UNDERFLOW = f"< {TINY:g}"
OVERFLOW_NOTES = {
    BEYOND: f"{BEYOND}: the model's value lies outside what a floating-point number holds (an "
            "overflow, or a rate too small to show), so no figure is printed; the other columns say "
            "what is reachable.",
    UNDERFLOW: f"{UNDERFLOW}: the model's logical error per cycle is below {TINY:g}, smaller than a "
               "floating-point number holds (an underflow, not zero).",
}


def num(x: float | None, digits: int = 4) -> str:
    """A number for people: ``digits`` significant digits (integers in full), '—' for missing or
    nan, :data:`BEYOND` for +infinity; never '-0'."""
    if x is None:
        return "—"
    if isinstance(x, int) and not isinstance(x, bool):
        return str(x)
    x = float(x)
    if math.isnan(x) or x == -math.inf:
        return "—"
    if math.isinf(x):
        return BEYOND
    text = f"{x + 0.0:.{digits}g}"  # + 0.0 turns -0.0 into 0.0
    return "0" if text in ("-0", "0") else text


def _degenerate(*cells: str) -> bool:
    """An interval whose ends and best say nothing more than the best alone (all '0', all
    missing, all overflowing or all underflowing)."""
    return len(set(cells)) == 1 and cells[0] in ("0", "—", BEYOND, UNDERFLOW)


def span(best: float | None, low: float | None, high: float | None) -> str:
    """``best [low, high]`` (only ``best`` when both ends are missing, or when the interval is
    degenerate: never '0 [0, 0]')."""
    if low is None and high is None:
        return num(best)
    cells = (num(best), num(low), num(high))
    return cells[0] if _degenerate(*cells) else f"{cells[0]} [{cells[1]}, {cells[2]}]"


def _rate_cell(x: float | None, digits: int = 4) -> str:
    if x is not None and math.isfinite(float(x)) and 0 <= float(x) < TINY:
        return UNDERFLOW
    return num(x, digits)


def rate(best: float | None, iv: Interval | None = None) -> str:
    """A logical error rate, ``best [low, high]``: values below :data:`TINY` (zero included) are an
    underflow and read :data:`UNDERFLOW`, never '0 [0, 0]'."""
    if iv is None:
        return _rate_cell(best)
    cells = (_rate_cell(iv.best), _rate_cell(iv.low), _rate_cell(iv.high))
    return cells[0] if _degenerate(*cells) else f"{cells[0]} [{cells[1]}, {cells[2]}]"


def overflow_notes(cells: Any) -> list[str]:
    """The notes explaining :data:`BEYOND` / :data:`UNDERFLOW` for those that occur in ``cells``
    (strings, or rows of strings)."""
    flat = " ".join(c if isinstance(c, str) else " ".join(map(str, c)) for c in cells)
    return [note for marker, note in OVERFLOW_NOTES.items() if marker in flat]


def interval(iv: Interval | None) -> str:
    return "—" if iv is None else span(iv.best, iv.low, iv.high)


def estimate(best: float | None, iv: Interval | None, *, scale: float = 1.0) -> str:
    """``best [low, high]`` when there is an interval, else ``best`` alone; every number
    multiplied by ``scale`` (100 for percentages).

    >>> estimate(0.25, Interval(low=0.2, best=0.25, high=0.3), scale=100), estimate(0.25, None)
    ('25 [20, 30]', '0.25')
    """
    if iv is not None:
        return span(iv.best * scale, iv.low * scale, iv.high * scale)
    return num(None if best is None else best * scale)


def halvings(iv: Interval | None, factor: float) -> tuple[float, Interval | None]:
    """Halvings of error, log2(1/factor), and their interval from the factor's (the map is
    decreasing, so the factor's high end gives the low end). ``-0`` never appears.

    >>> halvings(Interval(low=0.125, best=0.25, high=0.5), 0.25)
    (2.0, Interval(best=2.0, low=1.0, high=3.0))
    """
    h = lambda s: 0.0 + (-math.log2(s) if s > 0 else math.inf)  # noqa: E731
    return h(factor), (None if iv is None else Interval(low=h(iv.high), best=h(iv.best), high=h(iv.low)))


#: said of a model figure printed without an interval (no bootstrap replicas were run)
POINT_VALUE = "best value of the model; no bootstrap interval"


@dataclasses.dataclass(frozen=True)
class TextTable:
    """One table as text: ``lead`` lines above it, ``notes`` below, then the caveat line."""

    key: str
    title: str
    headers: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    lead: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    caveat: str = CAVEAT

    def __post_init__(self) -> None:
        bad = [r for r in self.rows if len(r) != len(self.headers)]
        if bad:
            raise ValueError(f"table {self.key}: row {bad[0]!r} does not have {len(self.headers)} cells")

    @property
    def all_notes(self) -> tuple[str, ...]:
        """``notes`` and, where a cell or lead line shows an overflow or underflow, its note."""
        extra = [n for n in overflow_notes([*self.rows, *self.lead]) if n not in self.notes]
        return (*self.notes, *extra)


def _join(*parts: str) -> str:
    return "; ".join(p for p in parts if p)


# ---------------------------------------------------------------------------------------------
# requirements


def _with_point_note(best: float | None, iv: Interval | None, *, is_rate: bool = False) -> str:
    if is_rate:
        return rate(best, iv) if iv is not None else f"{rate(best)} ({POINT_VALUE})"
    return estimate(best, iv) if iv is not None else f"{num(best)} ({POINT_VALUE})"


#: readable names of the keys of Uncertainty.reachable_fraction
_ANSWER_NAMES = {"joint_factor": "joint factor", "today_distance": "today's distance", "mix": "cheapest mix"}


def _replica_note(uncertainty: Any) -> str:
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
    return (f"Bootstrap intervals over {uncertainty.replicas} replica models of the fit."
            + (" Replicas on which an answer exists, where not all (its interval is over those): "
               + ", ".join(partial) + "." if partial else ""))


def requirements_tables(req: Any, *, lambda_today_model: Interval | None = None,
                        uncertainty: Any = None) -> list[TextTable]:
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
    for a in (req.joint, *req.components):
        if a.reachable:
            cell = estimate(a.factor, a.factor_interval) + (f" {EXTRAPOLATED}" if a.extrapolation else "")
            lam = estimate(a.suppression, a.suppression_interval)
        else:
            cell = "not reachable" + ("" if a.lever == "joint" else " alone")
            # not reachable alone: the most it gives, with the component perfect
            lam = "—" if a.lever == "joint" else "max " + estimate(a.suppression, a.suppression_interval)
        rows.append((a.lever, cell, lam, *_mix_cells(mix, a.lever), _join(lever_note(a), *a.extrapolation)))
    total = estimate(mix.cost, mix.cost_interval)
    mix_lam = estimate(mix.suppression, mix.suppression_interval)
    notes = [f"Cheapest mix ({'reachable' if mix.reachable else 'not reachable'}): cost {total} "
             f"cost-weighted halvings of error (sum over components of cost x log2(1/factor)), Lambda "
             f"{mix_lam}; logical error per cycle {rate(mix.logical_error_per_cycle)} at distance "
             f"{req.distance}, the goal it is solved to meet" + (f"; {mix.note}" if mix.note else "") + ".",
             "Lambda reached: at the factor needed; 'max': with the component perfect, the most it "
             "gives alone. Cost share: the component's part of the mix's cost.",
             f"Model: {req.model_form} form; fit quality: {req.model_quality}.",
             _replica_note(uncertainty), EXTRAPOLATED_NOTE, *req.notes]
    return [TextTable(
        key="requirements", title="What each lever needs to reach the goal",
        headers=("lever", "scale factor needed, alone (x today's error)", "Lambda reached (ratio)",
                 "cheapest mix factor (x today's error)", "cheapest mix halvings (log2 of 1/factor)",
                 "cheapest mix cost share (%)", "note"),
        rows=tuple(rows), lead=lead, notes=tuple(n for n in notes if n))]


def lever_note(a: Any) -> str:
    """The note of one lever's answer, without the bare Lambda planning puts into the "not
    reachable alone" note (the Lambda column carries it with its interval).

    >>> from planner.planning import FactorAnswer
    >>> lever_note(FactorAnswer(lever="idle", reachable=False, factor=None, suppression=1.9, note="not reachable alone: with idle perfect, Lambda = 1.9"))
    'not reachable alone: even with idle perfect, Lambda stays below the Lambda needed'
    """
    if not a.reachable and a.lever != "joint":
        return f"not reachable alone: even with {a.lever} perfect, Lambda stays below the Lambda needed"
    return a.note


def _mix_cells(mix: Any, lever: str) -> tuple[str, str, str]:
    """Factor, halvings and cost share of ``lever`` in the cheapest mix ('—' for joint or no mix)."""
    if lever == "joint" or not mix.reachable or lever not in mix.scales:
        return "—", "—", "—"
    f_iv = mix.scale_intervals.get(lever)
    mark = f" {EXTRAPOLATED}" if any(x.startswith(f"{lever} ") for x in mix.extrapolation) else ""
    h, h_iv = halvings(f_iv, mix.scales[lever])
    share = estimate(mix.cost_shares.get(lever, 0.0), mix.cost_share_intervals.get(lever), scale=100)
    return estimate(mix.scales[lever], f_iv) + mark, estimate(h, h_iv), share


# ---------------------------------------------------------------------------------------------
# roadmap


def moving_components(rm: Any) -> list[str]:
    """Components whose scale changes along the roadmap (the others stay at today's error)."""
    first = rm.steps[0].scales
    return [c for c in first if any(s.scales[c] != 1.0 for s in rm.steps)]


def goal_distance(rm: Any) -> int:
    """The distance the roadmap judges the goal at (the largest within max_qubits)."""
    return rm.goal_distance if rm.goal_distance in rm.candidate_distances else rm.candidate_distances[-1]


def _fit_source(num_replicas: int) -> str:
    return (f"best [low, high] over {num_replicas} bootstrap models of the fit" if num_replicas
            else POINT_VALUE)


def roadmap_tables(rm: Any) -> list[TextTable]:
    """The roadmap steps (central rates), eps at every candidate distance, and the dated events
    with their ranges."""
    moving = moving_components(rm)
    dg = goal_distance(rm)
    extra: list[str] = []
    rows = []
    for s in rm.steps:
        if s.extrapolation and not extra:
            extra = [f"{s.date.isoformat()}: {x}" for x in s.extrapolation]
        mark = f" {EXTRAPOLATED}" if s.extrapolation else ""
        rows.append((s.date.isoformat(), *(num(s.scales[c]) for c in moving),
                     estimate(s.suppression, s.suppression_interval) + mark,
                     rate(s.eps[dg], s.eps_intervals.get(dg)),
                     f"{s.distance} ({s.physical_qubits})" if s.distance else "—"))
    lead = (f"From {rm.start.isoformat()} per {rm.step} at the central rates; goal: logical error per "
            f"cycle <= {num(rm.eps_target)} within {rm.max_qubits} physical qubits, judged at distance "
            f"{dg} (the largest within them). The table stops at the first step meeting the goal.",
            "Scales follow from the rates in the target file (inputs, no interval); Lambda and eps: "
            f"{_fit_source(rm.num_replicas)}, at the central rates.")
    notes = [*([f"{EXTRAPOLATED} extrapolated: outside the sampled scale range, first at {extra[0]}"]
               + extra[1:] if extra else []), *([rm.note] if rm.note else [])]
    steps = TextTable(key="roadmap", title="Roadmap: model predictions at the expected rates",
                      headers=("date", *(f"{c} scale (x today)" for c in moving), "Lambda (ratio)",
                               f"eps d={dg} (per cycle)", "distance (physical qubits)"),
                      rows=tuple(rows), lead=lead, notes=tuple(notes))
    eps = TextTable(key="roadmap_eps", title="Logical error per cycle at the candidate distances",
                    headers=("date", *(f"eps d={d} (per cycle)" for d in rm.candidate_distances)),
                    rows=tuple((s.date.isoformat(), *(rate(s.eps[d], s.eps_intervals.get(d))
                                                      for d in rm.candidate_distances)) for s in rm.steps),
                    lead=(f"The same steps; {_fit_source(rm.num_replicas)}.",))
    ev_rows = []
    for e in (rm.goal, *rm.milestones):
        rng = (f"[{e.low.isoformat() if e.low else 'before start'}, "
               f"{e.high.isoformat() if e.high else 'beyond horizon'}]") if rm.num_scenarios else "—"
        ev_rows.append((e.what, e.date.isoformat() if e.date else "not within horizon", rng,
                        f"{e.fraction_reached:.0%}" if rm.num_scenarios else "—"))
    dates = TextTable(key="roadmap_dates", title="When the goal and the Lambda milestones are met",
                      headers=("event", "date (central rates)", f"{CONFIDENCE:.0%} range (dates)",
                               "scenarios reaching it (%)"),
                      rows=tuple(ev_rows),
                      lead=(f"Ranges over {rm.num_scenarios} scenarios drawing the rates (their spreads) "
                            "and the fit (bootstrap models)." if rm.num_scenarios else
                            "Dates at the central rates with the best model (no spreads, no bootstrap: "
                            "no range).",))
    return [steps, eps, dates]


# ---------------------------------------------------------------------------------------------
# sensitivity


def sensitivity_tables(sens: Any, *, lumped: Sequence[str] = ()) -> list[TextTable]:
    """Shares of the 1/Lambda budget at today's point, most limiting first, with their intervals."""
    rows = []
    for r in sens.rows:
        iv = r.intervals
        rows.append((r.component + (" (lumped)" if r.component in lumped else ""),
                     estimate(r.share, iv.get("share"), scale=100),
                     estimate(r.elasticity, iv.get("elasticity")),
                     estimate(r.suppression_halved, iv.get("suppression_halved")),
                     estimate(r.suppression_perfect, iv.get("suppression_perfect")),
                     estimate(r.months_earlier, iv.get("months_earlier")), r.note))
    source = (f"Intervals: best [low, high] over {sens.num_replicas} bootstrap models of the fit, at the "
              "central rates (the spreads of the rates are not in them)." if sens.num_replicas
              else f"Figures: {POINT_VALUE}.")
    notes = [f"Model: {sens.model_form} form; fit quality: {sens.model_quality}."]
    if sens.note:
        notes.append(sens.note)
    return [TextTable(
        key="sensitivity", title="Which component holds Lambda back (today's point)",
        headers=("component", "share of 1/Lambda (%)", "d ln Lambda / d ln p (elasticity)",
                 "Lambda if halved (ratio)", "Lambda if perfect (ratio)",
                 f"months earlier at +{100 * sens.faster_points:g} points of error removed per year (months)", "note"),
        rows=tuple(rows),
        lead=("Lambda today from the response model: "
              f"{_with_point_note(sens.suppression_today, sens.suppression_today_interval)}. {source}",),
        notes=tuple(notes))]


# ---------------------------------------------------------------------------------------------
# fits


def fits_tables(report: FitReport) -> list[TextTable]:
    """Lambda per scale point and the threshold estimate."""
    rows = tuple((lf.axis, num(lf.factor), ",".join(map(str, lf.distances)), interval(lf.suppression),
                  interval(lf.ln_prefactor), num(lf.chi2_per_dof), lf.note) for lf in report.lambdas)
    th = report.threshold
    lead = (f"Threshold (joint factor where Lambda = 1): {interval(th.factor)}; {th.note}.",)
    return [TextTable(
        key="fits", title="Suppression factor Lambda per scale point",
        headers=("axis", "factor (x today's error)", "distances", "Lambda (eps_d / eps_d+2)",
                 "ln A (ln per cycle)", "chi2/dof", "note"),
        rows=rows, lead=lead, notes=tuple(report.notes))]


# ---------------------------------------------------------------------------------------------
# verify

#: the report's section when verify.json was made against an earlier fit
VERIFY_STALE = ("verify.json was made against an earlier fit (more samples, or other operating "
                "points since): its numbers no longer match these answers; run `planner verify DIR` again.")


def _scales_text(scales: dict[str, float]) -> str:
    """The scale factors of an operating point, briefly.

    >>> _scales_text({"gate_1q": 0.5, "gate_2q": 0.5}), _scales_text({"gate_2q": 0.4, "readout": 1.0})
    ('every component ×0.5', 'gate_2q ×0.4, others ×1')
    """
    values = set(scales.values())
    if len(values) == 1:
        return f"every component ×{num(values.pop())}"
    changed = [f"{c} ×{num(x)}" for c, x in scales.items() if x != 1.0]
    return ", ".join(changed) + (", others ×1" if len(changed) < len(scales) else "")


def verify_tables(v: Any) -> list[TextTable]:
    """Predicted (response model, bootstrap) vs sampled (fits of the verify samples) at the
    proposed operating points (``v``: :class:`planner.planning.verify.Verification`)."""
    rows = []
    for r in v.rows:
        is_eps = r.quantity == "logical_error_per_cycle"
        pred = rate(r.predicted.best, r.predicted) if is_eps else interval(r.predicted)
        sampled = interval(r.sampled) + (" *" if r.zero_errors else "")
        rows.append((r.label, "eps per cycle" if is_eps else "Lambda (ratio)",
                     "—" if r.distance is None else str(r.distance), pred, sampled,
                     {True: "holds", False: "DIFFERS", None: "not sampled"}[r.holds]))
    points = "; ".join(f"{p.label}: {_scales_text(p.scales)}" for p in v.points)
    lead = (f"Operating points sampled on the simulator (scale on today's error): {points or 'none'}.",
            f"Distances: {', '.join(map(str, v.distances))}. Overall: "
            + ("every prediction holds." if v.holds else "some predictions DIFFER from the samples."))
    notes = ["holds: the predicted and sampled intervals overlap; DIFFERS: they do not.",
             *(["* no errors sampled: the sampled interval is a bound."] if any(r.zero_errors for r in v.rows)
               else []), *([v.note] if v.note else [])]
    return [TextTable(key="verify", title="Verification: predicted vs sampled at the proposed operating points",
                      headers=("point", "quantity", "distance", "predicted (model, bootstrap)",
                               "sampled (fit of the samples)", "holds"),
                      rows=tuple(rows), lead=lead, notes=tuple(notes))]


# ---------------------------------------------------------------------------------------------
# Markdown


def _md_line(text: str) -> str:
    return text.replace("\n", " ")


def _md_cell(text: str) -> str:
    return _md_line(text).replace("|", "\\|")


def to_markdown(tables: Sequence[TextTable], *, heading: str) -> str:
    """One Markdown document: heading, the interval convention once, then each table with its
    lead lines, notes and caveat."""
    out = [f"# {heading}", "", INTERVAL_NOTE, ""]
    for t in tables:
        out += [f"## {t.title}", ""]
        for x in t.lead:  # one paragraph per line
            out += [_md_line(x), ""]
        out.append("| " + " | ".join(_md_cell(h) for h in t.headers) + " |")
        out.append("|" + "|".join("---" for _ in t.headers) + "|")
        out += ["| " + " | ".join(_md_cell(c) for c in r) + " |" for r in t.rows]
        out.append("")
        out += [*(f"- {_md_line(n)}" for n in t.all_notes), ""] if t.all_notes else []
        out += [f"_{t.caveat}_", ""]
    return "\n".join(out)


def json_safe(x: Any) -> Any:
    """A copy JSON can hold: non-finite floats become null (JSON has no inf/nan), keys strings.

    >>> json_safe({"a": float("inf"), 1: [2.0, float("nan")]})
    {'a': None, '1': [2.0, None]}
    """
    if isinstance(x, float) and not math.isfinite(x):
        return None
    if isinstance(x, float) and x == 0:
        return 0.0  # never -0.0
    if isinstance(x, dict):
        return {str(k): json_safe(v) for k, v in x.items()}
    if isinstance(x, list | tuple):
        return [json_safe(v) for v in x]
    return x
