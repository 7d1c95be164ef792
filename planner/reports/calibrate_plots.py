"""Plots of ``planner calibrate`` (PNG bytes by file name): detection probability against round
by stabilizer type (data, first principles, calibrated), a map of each stabilizer's mean
detection probability, p_ij by class (data against model), and the staged comparison."""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING

import numpy as np

from planner.devicedata import CLASSES
from planner.reports.plotkit import errbar, figure, png_bytes, title

if TYPE_CHECKING:
    from planner.jobs.calibrate import Calibration

__all__ = ["calibration_plots"]

COLORS = {"data": "#222222", "first principles": "#1f77b4", "calibrated": "#d62728"}


def calibration_plots(cal: Calibration, *, rounds: Sequence[tuple], classes: Sequence[tuple]) -> dict[str, bytes]:
    """``rounds``, ``classes``: the rows of :func:`planner.reports.calibrate.round_rows` and
    :func:`~planner.reports.calibrate.class_rows` (the tables' numbers, drawn)."""
    return {"calibrate_rounds.png": rounds_plot(rounds), "calibrate_map.png": map_plot(cal),
            "calibrate_pairs.png": pairs_plot(cal, classes), "calibrate_stages.png": stages_plot(cal)}


def rounds_plot(rows: Sequence[tuple]) -> bytes:
    kinds = sorted({k for _, k, *_ in rows})
    fig, axes = figure(4.2 * len(kinds), 3.6, ncols=len(kinds))
    for ax, kind in zip(axes[0], kinds):
        sel = [r for r in rows if r[1] == kind]
        x = [r[0] for r in sel]
        for col, name, style in ((2, "data", "o"), (3, "first principles", "--"), (4, "calibrated", "-")):
            ax.plot(x, [r[col] for r in sel], style, color=COLORS[name], label=name, markersize=4)
        ax.set_xlabel("round")
        ax.set_ylabel("mean detection probability")
        title(ax, f"{kind} stabilizers", fontsize=11)
        ax.legend(fontsize=8)
    return png_bytes(fig)


def map_plot(cal: Calibration) -> bytes:
    st = cal.stabilizers
    xy = np.array([s.xy for s in st])
    data = np.array([s.data for s in st])
    ratio = data / np.maximum([s.model for s in st], 1e-12)
    fig, axes = figure(9.0, 4.2, ncols=2)
    for ax, values, label, cmap in ((axes[0][0], data, "mean detection probability (data)", "viridis"),
                                    (axes[0][1], ratio, "data / calibrated model with its outlier qubits", "coolwarm")):
        sc = ax.scatter(xy[:, 0], xy[:, 1], c=values, cmap=cmap, s=160, marker="s")
        for q in cal.fit.qubits:
            ax.scatter([q.qubit[0]], [q.qubit[1]], marker="x", color="k", s=80)
        ax.set_aspect("equal")
        ax.invert_yaxis()
        ax.figure.colorbar(sc, ax=ax, shrink=0.8)
        title(ax, label + (" (x: outlier qubit)" if cal.fit.qubits else ""), fontsize=10)
    return png_bytes(fig)


def pairs_plot(cal: Calibration, rows: Sequence[tuple]) -> bytes:
    iu = np.triu_indices(len(cal.layout.round), 1)
    cls = cal.classes[iu]
    data, cal_p = cal.data_pairs[iu], cal.cal_pairs[iu]
    fig, axes = figure(9.0, 4.0, ncols=2)
    ax = axes[0][0]
    for k, name in enumerate(CLASSES[:-1]):
        sel = (cls == k) & np.isfinite(data)
        if sel.any():
            ax.scatter(cal_p[sel], data[sel], s=6, label=name)
    hi = float(np.nanmax([cal_p.max(), np.nanmax(data), 1e-6]))
    ax.plot([0, hi], [0, hi], color="k", linewidth=0.8)
    ax.set_xlabel("p_ij, calibrated model")
    ax.set_ylabel("p_ij, data")
    ax.legend(fontsize=8)
    title(ax, "Pairs the model connects", fontsize=11)
    ax = axes[0][1]
    x = np.arange(len(rows))
    for off, col, name in ((-0.25, 2, "data"), (0.0, 3, "first principles"), (0.25, 4, "calibrated")):
        ax.bar(x + off, [r[col] for r in rows], width=0.25, color=COLORS[name], label=name)
    ax.set_xticks(x, [r[0] for r in rows], rotation=20, fontsize=8)
    ax.set_ylabel("mean p_ij")
    ax.legend(fontsize=8)
    title(ax, "By class", fontsize=11)
    return png_bytes(fig)


def stages_plot(cal: Calibration) -> bytes:
    fig, axes = figure(6.0, 3.8)
    ax = axes[0][0]
    pts = [(k, s) for k, s in enumerate(cal.stages) if s.eps is not None]
    if pts:
        errbar(ax, [k for k, _ in pts], [s.eps for _, s in pts], color=COLORS["calibrated"], label="model stage")
    if cal.measured is not None:
        m = cal.measured
        ax.axhspan(m.low, m.high, color="#888888", alpha=0.3)
        ax.axhline(m.best, color="k", label="measured")
    ax.set_xticks(range(len(cal.stages)), [s.name for s in cal.stages], rotation=20, fontsize=8)
    ax.set_yscale("log")
    ax.set_ylabel("logical error per cycle")
    ax.legend(fontsize=8)
    title(ax, "Staged comparison (95% intervals)" if cal.stages else "Stages not sampled", fontsize=11)
    return png_bytes(fig)
