"""Report tables as text cells: one layout shared by the Markdown files and the HTML page, so a
number reads the same wherever a person meets it.

Builders take the planning result objects and return :class:`TextTable` values; renderers
(:func:`to_markdown` here, :mod:`planner.reports.html`) only lay them out. Numbers use
:func:`num` (4 significant digits); intervals read ``best [low, high]`` at
:data:`~planner.fits.CONFIDENCE`, stated once per document (:data:`INTERVAL_NOTE`).

>>> num(0.000123456), num(None), num(float("inf")), span(1.5, 1.25, 1.75)
('0.0001235', '—', 'inf', '1.5 [1.25, 1.75]')
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


def num(x: float | None, digits: int = 4) -> str:
    """A number for people: ``digits`` significant digits, '—' for missing, 'inf' for infinite."""
    if x is None:
        return "—"
    x = float(x)
    if math.isnan(x):
        return "—"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:.{digits}g}"


def span(best: float | None, low: float | None, high: float | None) -> str:
    """``best [low, high]`` (only ``best`` when both ends are missing)."""
    if low is None and high is None:
        return num(best)
    return f"{num(best)} [{num(low)}, {num(high)}]"


def interval(iv: Interval | None) -> str:
    return "—" if iv is None else span(iv.best, iv.low, iv.high)


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


def _join(*parts: str) -> str:
    return "; ".join(p for p in parts if p)


# ---------------------------------------------------------------------------------------------
# requirements


def requirements_tables(req: Any, *, lambda_today_model: Interval | None = None) -> list[TextTable]:
    """What each lever needs for the goal (``req``: :class:`planner.planning.Requirements`).

    ``lambda_today_model``: the bootstrap interval of the model's Lambda today, when known.
    """
    td = req.today
    today_dist = interval(td.distance_interval) if td.distance_interval else num(td.distance)
    model_lam = interval(lambda_today_model) if lambda_today_model else num(td.suppression_model)
    lead = (
        f"Goal: logical error per cycle <= {num(req.eps_target)} at distance {req.distance} "
        f"({req.physical_qubits} physical qubits, 2d^2-1; distance {req.distance_source}).",
        f"Lambda needed at that distance with today's prefactor: {num(req.required_suppression)}.",
        f"Lambda today: {interval(td.suppression_fitted)} fitted at joint factor 1; "
        f"{model_lam} from the response model.",
        "Smallest distance meeting the goal with today's device: "
        + (f"{today_dist} ({td.physical_qubits} physical qubits)" if td.distance else "none")
        + (f"; {td.note}" if td.note else "") + ".",
    )
    mix = req.mix
    rows = []
    for a in (req.joint, *req.components):
        if a.reachable:
            cell = interval(a.factor_interval) if a.factor_interval else num(a.factor)
            cell += f" {EXTRAPOLATED}" if a.extrapolation else ""
        else:
            cell = "not reachable" + ("" if a.lever == "joint" else " alone")
        mix_cell = "—" if a.lever == "joint" else num(mix.scales.get(a.lever))
        if a.lever != "joint" and any(x.startswith(f"{a.lever} ") for x in mix.extrapolation):
            mix_cell += f" {EXTRAPOLATED}"
        rows.append((a.lever, cell, num(a.suppression), mix_cell, _join(a.note, *a.extrapolation)))
    notes = [f"Cheapest mix ({'reachable' if mix.reachable else 'not reachable'}): cost "
             f"{num(mix.cost)} cost-weighted halvings of error, Lambda {num(mix.suppression)}, "
             f"logical error per cycle {num(mix.logical_error_per_cycle)}"
             + (f"; {mix.note}" if mix.note else "") + ".",
             f"Model: {req.model_form} form; fit quality: {req.model_quality}.",
             EXTRAPOLATED_NOTE, *req.notes]
    return [TextTable(
        key="requirements", title="What each lever needs to reach the goal",
        headers=("lever", "scale factor needed, alone (x today's error)", "Lambda reached (ratio)",
                 "cheapest mix factor (x today's error)", "note"),
        rows=tuple(rows), lead=lead, notes=tuple(notes))]


# ---------------------------------------------------------------------------------------------
# roadmap


def moving_components(rm: Any) -> list[str]:
    """Components whose scale changes along the roadmap (the others stay at today's error)."""
    first = rm.steps[0].scales
    return [c for c in first if any(s.scales[c] != 1.0 for s in rm.steps)]


def roadmap_tables(rm: Any) -> list[TextTable]:
    """The roadmap steps (central rates) and the dated events with their ranges."""
    moving = moving_components(rm)
    headers = ("date", *(f"{c} scale (x today)" for c in moving), "Lambda (ratio)",
               *(f"eps d={d} (per cycle)" for d in rm.candidate_distances), "distance (physical qubits)")
    rows = tuple((s.date.isoformat(), *(num(s.scales[c]) for c in moving), num(s.suppression),
                  *(num(s.eps[d]) for d in rm.candidate_distances),
                  f"{s.distance} ({s.physical_qubits})" if s.distance else "—") for s in rm.steps)
    lead = (f"From {rm.start.isoformat()} per {rm.step} at the central rates; goal: logical error per "
            f"cycle <= {num(rm.eps_target)} within {rm.max_qubits} physical qubits. The table stops "
            "at the first step meeting the goal.",)
    steps = TextTable(key="roadmap", title="Roadmap: model predictions at the expected rates",
                      headers=headers, rows=rows, lead=lead, notes=(rm.note,) if rm.note else ())
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
                            "and the fit (bootstrap models).",) if rm.num_scenarios else ())
    return [steps, dates]


# ---------------------------------------------------------------------------------------------
# sensitivity


def sensitivity_tables(sens: Any, *, lumped: Sequence[str] = ()) -> list[TextTable]:
    """Shares of the 1/Lambda budget at today's point, most limiting first."""
    rows = tuple((r.component + (" (lumped)" if r.component in lumped else ""), num(100 * r.share),
                  num(r.elasticity), num(r.suppression_halved), num(r.suppression_perfect),
                  num(r.months_earlier), r.note) for r in sens.rows)
    notes = [f"Model: {sens.model_form} form; fit quality: {sens.model_quality}."]
    if sens.note:
        notes.append(sens.note)
    return [TextTable(
        key="sensitivity", title="Which component holds Lambda back (today's point)",
        headers=("component", "share of 1/Lambda (%)", "d ln Lambda / d ln p (elasticity)",
                 "Lambda if halved (ratio)", "Lambda if perfect (ratio)",
                 f"months earlier at +{100 * sens.faster_points:g} points of error removed per year (months)", "note"),
        rows=rows,
        lead=(f"Lambda today from the response model: {num(sens.suppression_today)}. Point values of "
              "the model (no interval).",),
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
        out += [*(f"- {_md_line(n)}" for n in t.notes), ""] if t.notes else []
        out += [f"_{t.caveat}_", ""]
    return "\n".join(out)
