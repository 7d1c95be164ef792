"""The leakage study rendered: tables on a terminal (rich), a CSV per table, a Markdown summary, a
plot (leaked population and detection probability against round, per depth, with the rate
equations), and the study's JSON."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path
from typing import Any

from rich.console import Console
from rich.table import Table

from planner.fits import Interval
from planner.jobs.leakage import LeakageStudy, steady_comparison
from planner.jobs.leakage_lever import LEVERS, RemovalLever
from planner.reports.files import ensure_dir, write_atomic
from planner.reports.formats import interval


def _iv(x: Interval | None) -> str:
    return interval(x) if x is not None else "-"


def population_rows(study: LeakageStudy) -> list[list[str]]:
    """One row per (depth, round): leaked data and measure fractions, detection probability,
    the Pauli model's detection probability and the rate equations' populations."""
    rows = []
    for depth in study.depths:
        for r in range(depth.rounds):
            pauli = study.pauli_detection[r] if r < len(study.pauli_detection) else None
            rows.append([str(depth.rounds), str(r + 1), _iv(depth.data[r]), f"{study.rate.data[r]:.3g}",
                         _iv(depth.measure[r]), f"{study.rate.measure[r]:.3g}",
                         _iv(depth.detection[r] if r < len(depth.detection) else None), _iv(pauli)])
    return rows


POPULATION_HEADER = ["stopped at", "round", "data leaked", "rate eq.", "measure leaked", "rate eq.",
                     "detection prob.", "without leakage"]
VARIANT_HEADER = ["variant", "what it is", "shots", "errors", "logical error per cycle"]


def render(study: LeakageStudy, console: Console, *, every_depth: bool = False) -> None:
    """The study's tables (``every_depth``: every depth's rows; else the longest only)."""
    console.print(f"Leakage: {study.target}, d={study.distance}, {study.rounds} rounds, basis "
                  f"{study.basis} (95% intervals; populations count each qubit in each shot)",
                  soft_wrap=True)
    table = Table(*POPULATION_HEADER, title="Leaked population and detection probability per round")
    for row in population_rows(study):
        if every_depth or row[0] == str(study.rounds):
            table.add_row(*row)
    console.print(table)
    steady = steady_comparison(study)
    for name, (sampled, rate) in steady.items():
        console.print(f"steady state, {name} qubits: sampled (last 3 rounds) {_iv(sampled)}; "
                      f"rate equations {rate:.3g}"
                      + ("" if sampled.high >= rate * 0.9 else " (not yet reached at this depth)"),
                      soft_wrap=True)
    if study.variants:
        vt = Table(*VARIANT_HEADER, title=f"What leakage removal is worth at d={study.distance}")
        for v in study.variants:
            vt.add_row(v.label, v.description, f"{v.shots:,}", f"{v.errors:,}", _iv(v.per_cycle))
        console.print(vt)
        console.print(verdict(study), soft_wrap=True)


def render_lever(answer: RemovalLever, console: Console) -> None:
    """The removal efficiency meeting the goal, and the points it was read from."""
    table = Table("efficiency", "Lambda", f"eps per cycle at d={answer.distance} (extrapolated)",
                  title=f"Removal lever '{answer.lever}' ({', '.join(LEVERS[answer.lever])}): goal "
                  f"{answer.goal:g} per cycle at d={answer.distance}")
    for p in answer.points:
        table.add_row(f"{p.efficiency:g}", _iv(p.suppression), _iv(p.eps_at_goal))
    console.print(table)
    head = (f"efficiency needed: {_iv(answer.efficiency)}" if answer.efficiency is not None
            else "efficiency needed: none of the sampled ones")
    console.print(f"{head} ({answer.note})", soft_wrap=True)


def verdict(study: LeakageStudy) -> str:
    """One sentence comparing the removal variants with the better two-qubit gate."""
    by = {v.label: v for v in study.variants}
    gate = by.get("gate_2q_x0.7")
    if gate is None:
        return ""
    parts = []
    for label in ("reset_removal", "all_removal"):
        v = by.get(label)
        if v is None:
            continue
        if v.per_cycle.high < gate.per_cycle.low:
            how = "better than"
        elif v.per_cycle.low > gate.per_cycle.high:
            how = "worse than"
        else:
            how = "indistinguishable (intervals overlap) from"
        parts.append(f"{label} is {how} a 30% better two-qubit gate")
    return "At this distance: " + "; ".join(parts) + "."


def _csv(header: list[str], rows: list[list[str]]) -> str:
    buf = io.StringIO()
    writer = csv.writer(buf)
    writer.writerow(header)
    writer.writerows(rows)
    return buf.getvalue()


def _series(xs: Any) -> tuple[list[float], list[float], list[float]]:
    return [x.best for x in xs], [x.best - x.low for x in xs], [x.high - x.best for x in xs]


def plot(study: LeakageStudy) -> bytes:
    """PNG: leaked population (data, measure; rate equations dashed) and detection probability
    against round, one curve per depth."""
    from planner.reports.plotkit import figure, fit_titles, png_bytes, title

    fig, axes = figure(11, 4.2, ncols=2)
    ax, bx = axes[0, 0], axes[0, 1]
    deep = study.depths[-1]
    rounds = list(range(1, deep.rounds + 1))
    for name, series, rate in (("data", deep.data, study.rate.data), ("measure", deep.measure, study.rate.measure)):
        best, lo, hi = _series(series)
        ax.errorbar(rounds, best, yerr=[lo, hi], fmt="o", ms=3, capsize=2, label=f"{name} qubits (sampled)")
        ax.plot(rounds, rate, "--", label=f"{name} qubits (rate equations)")
    ax.axhline(study.rate.steady_data, color="grey", ls=":", label="data steady state (rate equations)")
    ax.set_xlabel("round")
    ax.set_ylabel("leaked fraction")
    ax.legend(fontsize=8)
    title(ax, "Leaked population (95% intervals)", fontsize=11)
    for depth in study.depths:
        best, lo, hi = _series(depth.detection)
        bx.errorbar(range(1, len(best) + 1), best, yerr=[lo, hi], fmt="o-", ms=3, capsize=2,
                    label=f"stopped at {depth.rounds} rounds")
    best, _, _ = _series(study.pauli_detection)
    bx.plot(range(1, len(best) + 1), best, "k:", label="without leakage")
    bx.set_xlabel("round (last point: data readout)")
    bx.set_ylabel("detection probability")
    bx.legend(fontsize=8)
    title(bx, "Detection probability per round", fontsize=11)
    return png_bytes(fit_titles(fig))


def write(study: LeakageStudy, out_dir: Path) -> list[Path]:
    """leakage.json, leakage_population.csv, leakage_variants.csv, leakage.png under ``out_dir``."""
    out_dir = ensure_dir(out_dir)
    written = [write_atomic(out_dir / "leakage.json", json.dumps(study.to_json(), indent=2)),
               write_atomic(out_dir / "leakage_population.csv", _csv(POPULATION_HEADER, population_rows(study)))]
    if study.variants:
        rows = [[v.label, v.description, str(v.shots), str(v.errors), _iv(v.per_cycle)] for v in study.variants]
        written.append(write_atomic(out_dir / "leakage_variants.csv", _csv(VARIANT_HEADER, rows)))
    written.append(write_atomic(out_dir / "leakage.png", plot(study)))
    return written
