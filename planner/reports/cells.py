"""The cells of each result, made once: the report tables (:mod:`planner.reports.text`) and the
terminal's compact views (:mod:`planner.reports.tables`) both take their cells from here, so a
figure reads the same string in every place it appears.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from planner.reports.formats import EXTRAPOLATED, estimate, halvings, percent, rate

if TYPE_CHECKING:
    from planner.fits import Interval
    from planner.planning import Answers, FactorAnswer, MixAnswer, Roadmap
    from planner.planning.roadmap import RoadmapStep
    from planner.planning.sensitivity import ComponentSensitivity, Sensitivity


def lambda_today_model(answers: Answers) -> Interval | None:
    """The bootstrap interval of the model's Lambda today (None without replicas)."""
    unc = answers.uncertainty
    return unc.intervals.get("lambda_today") if unc is not None else None


#: the cell of every figure of a component without its own sweep axis
NOT_SAMPLED = "not sampled"


def lumped_components(answers: Answers) -> tuple[str, ...]:
    """Components without their own sweep axis ("not sampled": no figure of their own)."""
    return tuple(answers.model.unsampled) if answers.model is not None else ()


# ---------------------------------------------------------------------------------------------
# requirements


#: the mark on an answer built on a response model that misfits its points
MISFIT_MARK = "!"
#: what the mark means (under every table that shows it)
MISFIT_NOTE = (f"{MISFIT_MARK} the response model misfits its points beyond the limits: the answer is "
               "unreliable (its interval includes the misfit, scaled by chi2/dof)")
#: what "marginal" means (under every table that shows it)
MARGINAL_NOTE = ("marginal: the verdict flips with sampling noise or the model form (reached on 10-90% of "
                 "the replicas, on some distance-window models only, or the Lambda reached sits within its "
                 "interval of the one needed): no verdict either way")
#: what the interval-source column means
SOURCE_NOTE = ("interval from: the part that dominates the interval, 'sampling' (bootstrap) or 'model' "
               "(spread between distance windows and the response model's misfit), combined in quadrature")


def source_cell(source: str, misfit: bool) -> str:
    """Which part dominates an answer's interval, with the misfit mark.

    >>> source_cell("model", True), source_cell("", False)
    ('model !', '—')
    """
    return (source or "—") + (f" {MISFIT_MARK}" if misfit else "")


def lever_cells(a: FactorAnswer) -> tuple[str, str]:
    """The factor one lever needs alone (marked when extrapolated) and the Lambda it reaches
    ('max': not reachable alone, with the component perfect; "not sampled": no own sweep axis;
    "marginal": the verdict flips with noise or the model form)."""
    if not a.sampled:
        return NOT_SAMPLED, "—"
    if a.marginal:
        lam = estimate(a.suppression, a.suppression_interval)
        if a.reachable and a.factor is not None:
            return "marginal: " + estimate(a.factor, a.factor_interval), lam
        return "marginal", ("max " if a.lever != "joint" else "") + lam
    if a.reachable:
        return (estimate(a.factor, a.factor_interval) + (f" {EXTRAPOLATED}" if a.extrapolation else ""),
                estimate(a.suppression, a.suppression_interval))
    if a.lever == "joint":
        return "not reachable", "—"
    return "not reachable alone", "max " + estimate(a.suppression, a.suppression_interval)


def lever_note(a: FactorAnswer) -> str:
    """The note of one lever's answer, without the bare Lambda planning puts into the "not
    reachable alone" note (the Lambda column carries it with its interval).

    >>> from planner.planning import FactorAnswer
    >>> lever_note(FactorAnswer(lever="idle", reachable=False, factor=None, suppression=1.9, note="not reachable alone: with idle perfect, Lambda = 1.9"))
    'not reachable alone: even with idle perfect, Lambda stays below the Lambda needed'
    """
    if a.sampled and a.marginal:
        return (f"marginal: reached on some replicas or distance-window models and not on others"
                + ("" if a.reachable else f"; with {a.lever} perfect, Lambda is within its interval of the one needed"))
    if a.sampled and not a.reachable and a.lever != "joint":
        return f"not reachable alone: even with {a.lever} perfect, Lambda stays below the Lambda needed"
    return a.note


def mix_cells(mix: MixAnswer, lever: str) -> tuple[str, str, str]:
    """Factor (marked when extrapolated), halvings and cost share (%) of ``lever`` in the
    cheapest mix ('—' for joint or no mix; "not sampled" for a component without its own axis,
    which the mix leaves at today's error)."""
    if lever in mix.not_sampled:
        return NOT_SAMPLED, "—", "—"
    if lever == "joint" or not mix.reachable or lever not in mix.scales:
        return "—", "—", "—"
    f_iv = mix.scale_intervals.get(lever)
    mark = f" {EXTRAPOLATED}" if any(x.startswith(f"{lever} ") for x in mix.extrapolation) else ""
    h, h_iv = halvings(f_iv, mix.scales[lever])
    share = percent(mix.cost_shares.get(lever, 0.0), mix.cost_share_intervals.get(lever))
    return estimate(mix.scales[lever], f_iv) + mark, estimate(h, h_iv), share


def group_row(sens: Sensitivity, *, short: bool = False) -> tuple[str, str] | None:
    """The one row the components without their own axis get together: its label (``short``:
    without their names, for narrow terminals) and their share of 1/Lambda (%, with its
    interval), None when every component has its axis."""
    if not sens.unsampled:
        return None
    label = "not sampled, together" if short else f"not sampled separately: {', '.join(sens.unsampled)} (together)"
    return label, percent(sens.unsampled_share, sens.unsampled_share_interval)


# ---------------------------------------------------------------------------------------------
# roadmap


def goal_distance(rm: Roadmap) -> int:
    """The distance the roadmap judges the goal at (the largest within max_qubits)."""
    return rm.goal_distance if rm.goal_distance in rm.candidate_distances else rm.candidate_distances[-1]


def moving_components(rm: Roadmap) -> list[str]:
    """Components whose scale changes along the roadmap (the others stay at today's error)."""
    first = rm.steps[0].scales
    return [c for c in first if any(s.scales[c] != 1.0 for s in rm.steps)]


def step_cells(s: RoadmapStep, distance: int) -> tuple[str, str, str]:
    """Lambda (marked when extrapolated), eps per cycle at ``distance`` and the smallest
    distance meeting the goal with its physical qubits, at one roadmap step."""
    return (estimate(s.suppression, s.suppression_interval) + (f" {EXTRAPOLATED}" if s.extrapolation else ""),
            rate(s.eps[distance], s.eps_intervals.get(distance)),
            f"{s.distance} ({s.physical_qubits})" if s.distance else "—")


def event_rows(rm: Roadmap) -> list[tuple[str, str, str, str]]:
    """The goal and the Lambda milestones: event, date at the central rates, range over the
    scenarios, share of scenarios reaching it ('—' without scenarios)."""
    rows = []
    for e in (rm.goal, *rm.milestones):
        rng = (f"[{e.low.isoformat() if e.low else 'before start'}, "
               f"{e.high.isoformat() if e.high else 'beyond horizon'}]") if rm.num_scenarios else "—"
        rows.append((e.what, e.date.isoformat() if e.date else "not within horizon", rng,
                     f"{e.fraction_reached:.0%}" if rm.num_scenarios else "—"))
    return rows


# ---------------------------------------------------------------------------------------------
# sensitivity


def sensitivity_cells(r: ComponentSensitivity) -> dict[str, str]:
    """One component's figures with their intervals: ``share`` (%), ``elasticity``, ``halved``,
    ``perfect`` (Lambda) and ``earlier`` (months); "not sampled" in each for a component without
    its own sweep axis."""
    if not r.sampled:
        return dict.fromkeys(("share", "elasticity", "halved", "perfect", "earlier", "eps_halved", "eps_perfect"),
                             NOT_SAMPLED)
    iv = r.intervals
    return {"share": percent(r.share, iv.get("share")),
            "elasticity": estimate(r.elasticity, iv.get("elasticity")),
            "halved": estimate(r.suppression_halved, iv.get("suppression_halved")),
            "perfect": estimate(r.suppression_perfect, iv.get("suppression_perfect")),
            "earlier": estimate(r.months_earlier, iv.get("months_earlier")),
            "eps_halved": rate(r.eps_halved, iv.get("eps_halved")),
            "eps_perfect": rate(r.eps_perfect, iv.get("eps_perfect"))}
