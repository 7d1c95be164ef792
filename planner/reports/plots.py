"""Plots as PNG bytes (matplotlib's object API with the Agg renderer: no display, no pyplot state).

Each ``*_figure`` function returns a :class:`matplotlib.figure.Figure` (or None when its data is
missing) so tests can look inside; :func:`render_all` turns them into PNG bytes keyed by name.
Error bars and bands are :data:`~planner.fits.CONFIDENCE` intervals. matplotlib is imported
inside the functions (it is slow to import and only reports need it).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from planner.config import COMPONENTS, Target
from planner.fits import CONFIDENCE, FitReport
from planner.reports.cells import goal_distance
from planner.reports.formats import estimate, percent
from planner.reports.plotkit import (  # noqa: F401  (png_bytes, wrap, nice_log_ticks: re-exported)
    errbar,
    figure,
    fit_titles,
    fixed_ticks,
    nice_log_ticks,
    plain_log,
    png_bytes,
    shade,
    title,
    wrap,
)

if TYPE_CHECKING:
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from planner.fits import Interval, LambdaFit, Threshold
    from planner.planning.roadmap import DatedEvent, RateSet
    from planner.planning import Answers, ResponseModel, Roadmap, Sensitivity

#: colours of the axes of the sweep (own choice: distinct in print and for common colour blindness)
COLOURS = {"joint": "#1d3557", "gate_1q": "#e76f51", "gate_2q": "#2a9d8f", "readout": "#8338ec",
           "reset": "#f4a261", "idle": "#6c757d", "idle_measure": "#d62872"}
GOAL_COLOUR = "#b5179e"
THRESHOLD_COLOUR = "#9d0208"
#: fitted lines are extended towards the goal at most to this distance
MAX_PLOT_DISTANCE = 101
CL = f"{CONFIDENCE:.0%}"


# ---------------------------------------------------------------------------------------------


def _scale_point(ax: Axes, report: FitReport, lf: LambdaFit, colour: str, *, goal: float) -> float:
    """One scale point on the rate plot: its points with error bars (a zero-error point also as
    a down triangle at its upper end) and its fitted line, solid over the sampled distances and
    dashed towards the goal. Returns the distance the line reaches."""
    sampled = report.sampled_distances
    dmin, dmax = min(sampled), max(sampled)
    pts = sorted((p for p in report.distances if p.axis == lf.axis and p.factor == lf.factor),
                 key=lambda p: p.distance)
    errbar(ax, [p.distance for p in pts], [p.per_cycle for p in pts], color=colour,
           label=f"{lf.axis} x{lf.factor:g}")
    for p in (p for p in pts if p.zero_errors):
        ax.plot([p.distance], [p.per_cycle.high], marker="v", color=colour, markersize=7)
    if lf.suppression is None or lf.ln_prefactor is None:
        return dmax
    ln_a, ln_lam = lf.ln_prefactor.best, math.log(lf.suppression.best)
    stop = float(dmax)
    if ln_lam > 0:
        stop = min(max(2 * (ln_a - math.log(goal)) / ln_lam - 1, dmax), MAX_PLOT_DISTANCE)
    line = lambda d: np.exp(ln_a - (d + 1) / 2 * ln_lam)  # noqa: E731
    inside = np.linspace(dmin, dmax, 20)
    ax.plot(inside, line(inside), "-", color=colour, linewidth=1.4)
    if stop > dmax:
        beyond = np.linspace(dmax, stop, 60)
        ax.plot(beyond, line(beyond), "--", color=colour, linewidth=1.1)
    return stop


def rates_figure(report: FitReport, *, goal: float) -> Figure | None:
    """Logical error per cycle against distance for each scale point: points with error bars,
    fitted lines (solid over the sampled distances, dashed beyond, towards the goal)."""
    if not report.distances:
        return None
    axes_names = ["joint"] + sorted({p.axis for p in report.distances} - {"joint"})
    panels = [["joint"], [a for a in axes_names if a != "joint"]]
    panels = [p for p in panels if any(d.axis in p for d in report.distances)]
    fig, axs = figure(6.0 * len(panels), 4.6, ncols=len(panels), sharey=True)
    sampled = report.sampled_distances
    for ax, names in zip(axs[0], panels):
        d_end = float(max(sampled))
        for name in names:
            lfs = sorted((lf for lf in report.lambdas if lf.axis == name), key=lambda lf: lf.factor)
            for k, lf in enumerate(lfs):
                colour = shade(COLOURS.get(name, "#444444"), k, len(lfs))
                d_end = max(d_end, _scale_point(ax, report, lf, colour, goal=goal))
        ax.axhline(goal, color=GOAL_COLOUR, linewidth=1.5, linestyle=":", label=f"goal {goal:g}")
        ax.set_yscale("log")
        ax.set_xlim(min(sampled) - 1, d_end + 2)
        ax.set_xlabel("code distance d")
        title(ax, "joint axis (all components x factor)" if names == ["joint"]
              else "one component x factor, others today", fontsize=11)
        ax.grid(True, which="major", alpha=0.3)
        ax.legend(fontsize=7, ncol=2 if len(ax.get_legend_handles_labels()[0]) > 8 else 1)
    axs[0][0].set_ylabel("logical error per cycle")
    fig.suptitle(wrap(f"Logical error per cycle ({CL} intervals); dashed: fitted line extrapolated",
                      width_in=fig.get_figwidth(), fontsize=12), fontsize=12)
    return fig


def _threshold_marks(ax: Axes, th: Threshold, lo: float, hi: float) -> None:
    """The threshold's joint factor (a line) and its interval (a band, cut to the view from
    ``lo`` to ``hi``), or, when the sampled range does not bracket it, its note in the legend."""
    if th.factor is not None:
        ax.axvline(th.factor.best, color=THRESHOLD_COLOUR, linestyle=":",
                   label=f"threshold at joint x{th.factor.best:.3g}")
        left = th.factor.low if th.factor.low > 0 else lo
        right = th.factor.high if math.isfinite(th.factor.high) else hi
        ax.axvspan(left, right, color=THRESHOLD_COLOUR, alpha=0.08)
    elif th.note:  # in the legend box, which finds its own room (as text it sat on the Lambda = 1 line)
        ax.plot([], [], " ", label=wrap(th.note, width_in=2.6, fontsize=8))


def lambda_joint_figure(report: FitReport, model: ResponseModel | None = None) -> Figure | None:
    """Lambda against the joint scale factor: points, interval band, Lambda = 1 and the threshold."""
    joint = sorted((lf for lf in report.lambdas if lf.axis == "joint" and lf.suppression), key=lambda lf: lf.factor)
    if not joint:
        return None
    fig, axs = figure(6.4, 4.6)
    ax = axs[0][0]
    x = [lf.factor for lf in joint]
    ivs = [lf.suppression for lf in joint if lf.suppression is not None]
    if len(joint) > 1:
        ax.fill_between(x, [i.low for i in ivs], [i.high for i in ivs], color=COLOURS["joint"], alpha=0.18,
                        label=f"{CL} interval")
    errbar(ax, x, ivs, color=COLOURS["joint"], label="fitted Lambda")
    lo, hi = min(x) / 1.3, max(x) * 1.3
    if model is not None:
        s = np.geomspace(lo, hi, 80)
        lam = model.suppression_array(np.repeat(s[:, None], len(COMPONENTS), axis=1))
        ax.plot(s, lam, "--", color="#555555", linewidth=1.1, label=f"response model ({model.form})")
    ax.axhline(1.0, color=THRESHOLD_COLOUR, linewidth=1.2, label="Lambda = 1 (threshold)")
    _threshold_marks(ax, report.threshold, lo, hi)
    ax.axvline(1.0, color="#999999", linewidth=0.8)
    ax.set_xscale("log")
    ax.set_yscale("log")
    ax.set_xlim(lo, hi)
    ax.set_xlabel("joint scale factor (x today's error on every component)")
    ax.set_ylabel("suppression factor Lambda (eps_d / eps_d+2)")
    title(ax, f"Lambda against the joint scale ({CL} intervals)")
    plain_log(ax)
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=8)
    return fig


def _component_line(ax: Axes, pts: list[LambdaFit], name: str, *, dodge: float) -> None:
    """One component's Lambda points (moved sideways by the fraction ``dodge`` so the error bars
    of the lines sharing today's point stay apart) joined by a line."""
    pts = sorted(pts, key=lambda lf: lf.factor)
    x = [lf.factor * (1 + dodge) for lf in pts]
    colour = COLOURS.get(name, "#444444")
    ivs = [lf.suppression for lf in pts if lf.suppression is not None]
    errbar(ax, x, ivs, color=colour, label=name)
    ax.plot(x, [iv.best for iv in ivs], "-", color=colour, linewidth=1.2)


def lambda_components_figure(report: FitReport, *, unsampled: Sequence[str] = ()) -> Figure | None:
    """Lambda against each component's own factor (others today); today's point is shared; the
    components in ``unsampled`` (no own sweep axis) are named under the plot as not sampled."""
    names = sorted({lf.axis for lf in report.lambdas if lf.axis != "joint" and lf.suppression},
                   key=lambda c: COMPONENTS.index(c) if c in COMPONENTS else 99)
    if not names:
        return None
    today = report.today()
    fig, axs = figure(6.4, 4.6)
    ax = axs[0][0]
    for k, name in enumerate(names):
        pts = [lf for lf in report.lambdas if lf.axis == name and lf.suppression]
        _component_line(ax, pts + ([today] if today is not None and today.suppression is not None else []),
                        name, dodge=0.012 * (k - len(names) / 2))
    ax.axhline(1.0, color=THRESHOLD_COLOUR, linewidth=1.2, label="Lambda = 1 (threshold)")
    ax.axvline(1.0, color="#999999", linewidth=0.8)
    ax.set_xscale("log")
    factors = sorted({lf.factor for lf in report.lambdas if lf.axis in names} | {1.0})
    ax.set_xlim(factors[0] / 1.15, factors[-1] * 1.15)
    ax.set_xlabel("component scale factor (x today's error, others today; ticks: sampled)")
    ax.set_ylabel("suppression factor Lambda (eps_d / eps_d+2)")
    title(ax, f"Lambda against each component ({CL} intervals)")
    if unsampled:
        ax.text(0.01, 0.01, f"not sampled: {', '.join(unsampled)} (no own sweep axis; add to sweep.components\n"
                "and run `planner sweep TARGET`)", transform=ax.transAxes, fontsize=7, va="bottom", color="#555555")
    fixed_ticks(ax.xaxis, factors)
    ax.grid(True, which="both", alpha=0.25)
    ax.legend(fontsize=8)
    return fig


def _bar_data(sens: Sensitivity) -> tuple[list[str], list[float], list[Interval | None], list[str]]:
    """Labels, shares, intervals and colours of the budget bars, bottom first: the components with
    their own axis, and on top one bar for those without, together (none of their own)."""
    rows = [r for r in reversed(sens.rows) if r.sampled]
    labels = [r.component for r in rows]
    shares = [float(r.share or 0.0) for r in rows]
    ivs = [r.intervals.get("share") for r in rows]
    colours = [COLOURS.get(r.component, "#444444") for r in rows]
    if sens.unsampled and sens.unsampled_share is not None:
        labels.insert(0, f"not sampled separately:\n{', '.join(sens.unsampled)}")
        shares.insert(0, sens.unsampled_share)
        ivs.insert(0, sens.unsampled_share_interval)
        colours.insert(0, "#bbbbbb")
    return labels, shares, ivs, colours


def _share_bars(ax: Axes, sens: Sensitivity) -> bool:
    """The bars of the budget plot, each labelled with its share and interval (the group of
    components without their own axis hatched); whether any has an interval (error bars)."""
    labels, shares, ivs, colours = _bar_data(sens)
    share = np.array([100 * x for x in shares])
    lo = np.array([100 * (x - iv.low) if iv else 0.0 for x, iv in zip(shares, ivs)])
    hi = np.array([100 * (iv.high - x) if iv else 0.0 for x, iv in zip(shares, ivs)])
    has_iv = any(iv is not None for iv in ivs)
    bars = ax.barh(labels, share, color=colours,
                   xerr=[np.clip(lo, 0, None), np.clip(hi, 0, None)] if has_iv else None,
                   error_kw={"ecolor": "#222222", "capsize": 3, "elinewidth": 1.0})
    if sens.unsampled:
        bars[0].set_hatch("//")
    for y, (x, iv, top) in enumerate(zip(shares, ivs, share + hi)):
        ax.text(top, y, f"  {percent(x, iv)} %", va="center", fontsize=8)
    # room right of the longest bar for its "best [low, high] %" label
    ax.set_xlim(0, max(list(share + hi) + [1.0]) * 1.7)
    return has_iv


def budget_figure(sens: Sensitivity | None, *, lumped: tuple[str, ...] = ()) -> Figure | None:
    """Each component's share of 1/Lambda at today's point (horizontal bars, most limiting on top),
    error bars from the bootstrap intervals of the shares when there are any. Components without
    their own sweep axis (``sens.unsampled``; ``lumped`` is kept for callers) get no bar of their
    own: one hatched bar "not sampled separately" gives their share together."""
    if sens is None or not sens.rows:
        return None
    fig, axs = figure(6.4, 0.5 * len(_bar_data(sens)[0]) + 1.6)
    ax = axs[0][0]
    has_iv = _share_bars(ax, sens)
    ax.set_xlabel("share of 1/Lambda at today's point (%)")
    lam = estimate(sens.suppression_today, sens.suppression_today_interval)
    how = f"error bars: {CL} bootstrap" if has_iv else "best values, no bootstrap"
    title(ax, f"Error budget: Lambda today {lam} ({how})", fontsize=10)
    ax.grid(True, axis="x", alpha=0.3)
    return fig


def eps_band(models: Sequence[ResponseModel], scales: np.ndarray, distance: int,
             best: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The :data:`~planner.fits.CONFIDENCE` range of eps per cycle at ``distance`` over the replica
    ``models`` for each row of ``scales`` (shape (n, 6)), widened to hold ``best``: the same
    interval the roadmap's rows carry (:func:`planner.planning.uncertainty.replica_interval`)."""
    eps = np.minimum(np.exp(np.array([m.ln_eps_array(scales, distance) for m in models])), 0.5)
    q = (1 - CONFIDENCE) / 2
    lo, hi = np.quantile(eps, [q, 1 - q], axis=0)
    return np.minimum(lo, best), np.maximum(hi, best)


def _goal_marks(axes: Sequence[Axes], goal: DatedEvent, end: dt.date) -> None:
    """The goal's date (a line) and its range (a band) on each of ``axes``."""
    for ax in axes:
        if goal.date is not None:
            ax.axvline(goal.date, color=GOAL_COLOUR, linewidth=1.0)
        if goal.low is not None:
            ax.axvspan(goal.low, goal.high or end, color=GOAL_COLOUR, alpha=0.08)


def _qubits_panel(ax: Axes, rm: Roadmap, model: ResponseModel, target: Target, rates: RateSet, *,
                  horizon: float) -> None:
    """The physical qubits needed to meet the goal at each roadmap step, and the budget."""
    from planner.planning import physical_qubits, smallest_distance
    from planner.planning.model import qubit_rule
    from planner.planning.roadmap import STEPS_PER_YEAR, years_to_date

    per = STEPS_PER_YEAR[rm.step]
    ts = np.arange(0, int(horizon * per) + 1) / per
    qdates, qubits = [], []
    for y, row in zip(ts, rates.scales(ts)):
        d = smallest_distance(model, dict(zip(COMPONENTS, row.tolist())), rm.eps_target)
        qdates.append(years_to_date(rm.start, float(y)))
        qubits.append(physical_qubits(d, target.sweep.code) if d is not None else np.nan)
    ax.step(qdates, qubits, where="post", color=COLOURS["gate_2q"],
            label=f"physical qubits needed ({qubit_rule(target.sweep.code)})")
    ax.axhline(rm.max_qubits, color="#333333", linestyle="--", linewidth=1.0,
               label=f"goal.max_qubits {rm.max_qubits}")


def roadmap_figure(rm: Roadmap | None, model: ResponseModel | None, target: Target, *,
                   models: Sequence[ResponseModel] = ()) -> Figure | None:
    """eps at the candidate distances against date (log y) with the goal, and the physical qubits
    needed over time (lower panel), at the central rates. With the bootstrap replica ``models``,
    a band shows the interval of eps at the goal distance."""
    if rm is None or model is None or target.roadmap is None:
        return None
    from planner.planning.roadmap import RateSet, years_to_date

    horizon = target.roadmap.horizon_years
    rates = RateSet.from_rates(target.roadmap.rates, target=target)  # with the T1/T2 growth, as the steps
    t = np.linspace(0.0, horizon, int(horizon * 12) + 1)
    scales = rates.scales(t)
    dates = [years_to_date(rm.start, float(y)) for y in t]
    fig, axs = figure(7.2, 6.2, nrows=2, sharex=True, height_ratios=[3, 2])
    top, bottom = axs[0][0], axs[1][0]
    n = len(rm.candidate_distances)
    for k, d in enumerate(rm.candidate_distances):
        colour = shade(COLOURS["joint"], n - 1 - k, n)
        top.plot(dates, np.exp(model.ln_eps_array(scales, d)), "-", color=colour, label=f"d = {d}")
        top.plot([s.date for s in rm.steps], [s.eps[d] for s in rm.steps], "o", color=colour, markersize=3)
    dg = goal_distance(rm)
    if len(models):
        best = np.exp(model.ln_eps_array(scales, dg))
        lo, hi = eps_band(models, scales, dg, np.minimum(best, 0.5))
        top.fill_between(dates, lo, hi, color=COLOURS["joint"], alpha=0.22, linewidth=0,
                         label=f"d = {dg}: {CL} interval (bootstrap)")
    top.axhline(rm.eps_target, color=GOAL_COLOUR, linestyle=":", linewidth=1.5, label=f"goal {rm.eps_target:g}")
    # the lines fall for decades after the goal: keep the view on the goal's neighbourhood
    top.set_ylim(bottom=max(top.get_ylim()[0], rm.eps_target * 1e-3))
    g = rm.goal
    _goal_marks((top, bottom), g, dates[-1])
    top.set_yscale("log")
    top.set_ylabel("logical error per cycle")
    title(top, "Roadmap at the central rates" + (f": goal met {g.date}" if g.date else ": goal not met"))
    top.grid(True, which="major", alpha=0.3)
    top.legend(fontsize=8, ncol=2)
    _qubits_panel(bottom, rm, model, target, rates, horizon=horizon)
    bottom.set_yscale("log")
    plain_log(bottom, x=False)  # 700, 1000, 2000 rather than 7x10^2
    bottom.set_ylabel("physical qubits")
    bottom.set_xlabel("date")
    bottom.grid(True, which="major", alpha=0.3)
    bottom.legend(fontsize=8)
    return fig


def figures(answers: Answers, *, target: Target) -> dict[str, Figure]:
    """All figures that have data, by file stem."""
    report = answers.fits
    lumped = answers.model.unsampled if answers.model is not None else ()
    figs = {
        "logical_error_vs_distance": rates_figure(report, goal=target.goal.logical_error_per_cycle),
        "lambda_vs_joint_scale": lambda_joint_figure(report, answers.model),
        "lambda_vs_component_scale": lambda_components_figure(report, unsampled=tuple(lumped)),
        "inverse_lambda_budget": budget_figure(answers.sensitivity, lumped=tuple(lumped)),
        "roadmap": roadmap_figure(answers.roadmap, answers.model, target,
                                  models=answers.uncertainty.models if answers.uncertainty else ()),
    }
    return {k: v for k, v in figs.items() if v is not None}


def render_all(answers: Answers, *, target: Target) -> dict[str, bytes]:
    """PNG bytes of every figure with data, by file stem."""
    return {name: png_bytes(fig) for name, fig in figures(answers, target=target).items()}
