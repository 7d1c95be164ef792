"""The SD6 threshold from the crossing of d = 7, 9, 11, beside the published range.

``preset sd6`` (uniform depolarizing at p on every operation of a CX surface-code memory
circuit) is swept over p at d = 7, 9, 11, each at r = d and 3d rounds (Z basis, pymatching),
through the public API (``planner.__all__``). For each pair of neighbouring distances the
crossing is where eps_d = eps_(d+2): the root of a weighted straight line through
ln(eps_d / eps_(d+2)) against ln p over the grid (weights from the rates' intervals, widened by
the line's scatter where chi2/dof > 1); its interval is where the line's 95% band crosses 0.

Three estimates are printed: the per-cycle rate ``planner.fit_stats`` gives from both round counts
(boundary-free: the fidelity decay between them, :mod:`planner.fits.decay`), and the rates at
r = d and at r = 3d alone (each a single-round-count estimate, time boundaries included).

Published (circuit-level depolarizing, CX circuits, matching decoders): 0.5% - 0.7%, Gidney,
Newman, Fowler, Broughton, "A fault-tolerant honeycomb memory", Quantum 5, 605 (2021), abstract;
0.502% - 1.140% across circuits and decoders, Stephens, PRA 89, 022321 (2014), abstract.

Run:  .venv/bin/python bench/sd6_threshold.py [--workers 2] [--errors 4000]   (a few minutes)
Last line: ``sd6_crossing_percent=X [LOW, HIGH] published=0.5-0.7,0.502-1.140``.
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
import time
from collections.abc import Sequence
from pathlib import Path

from rich.console import Console

import numpy as np

import planner

TOML = """
[device]
name = "sd6 threshold bench (published model, no device)"
[device.preset]
model = "sd6"
p = 0.01
[goal]
logical_error_per_cycle = 1e-6
[sweep]
distances = [7, 9, 11]
bases = ["z"]
reach_distances = []
"""
#: p in percent (the preset's p = 1% times the joint scale)
GRID = (0.5, 0.6, 0.7, 0.8, 0.9, 1.0, 1.1)
DISTANCES = (7, 9, 11)


def args_of() -> argparse.Namespace:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--errors", type=int, default=4000, help="errors per task")
    ap.add_argument("--max-shots", type=int, default=2_000_000)
    ap.add_argument("--out", default=None, help="samples go here (default: a temporary directory)")
    return ap.parse_args()


def rates(stats: Sequence, keep) -> dict[tuple[float, int], planner.Interval]:
    """Per-cycle rate per (p in %, d) from planner's fits of the chosen tasks."""
    chosen = [s for s in stats if keep(s.json_metadata)]
    return {(round(100 * 0.01 * f.factor, 6), f.distance): f.per_cycle
            for f in planner.fit_stats(chosen).distances}


def log_sigma(iv: planner.Interval) -> float:
    """Log-space sigma of a rate from its 95% interval."""
    if not (iv.low > 0 and iv.high > 0):
        return math.inf
    return (math.log(iv.high) - math.log(iv.low)) / (2 * 1.96)


def pair_crossing(r: dict, d: int) -> tuple[float | None, float | None, float | None]:
    """(best, low, high) crossing of d and d + 2 in percent: the root of a weighted straight line
    through y = ln(eps_d / eps_(d+2)) against ln p, and where its 95% band crosses 0 (None where
    the band does not cross 0 within the grid)."""
    ps = [p for p in sorted({p for p, _ in r}) if (p, d) in r and (p, d + 2) in r
          and r[p, d].best > 0 and r[p, d + 2].best > 0]
    if len(ps) < 3:
        return None, None, None
    x = np.log(ps)
    y = np.array([math.log(r[p, d].best / r[p, d + 2].best) for p in ps])
    sig = np.array([math.hypot(log_sigma(r[p, d]), log_sigma(r[p, d + 2])) for p in ps])
    coef, cov = np.polyfit(x, y, 1, w=1 / sig, cov="unscaled")
    chi2 = float(np.sum(((np.polyval(coef, x) - y) / sig) ** 2)) / max(len(ps) - 2, 1)
    cov = cov * max(chi2, 1.0)  # scatter beyond the intervals widens the band (common practice)
    grid = np.linspace(x[0], x[-1], 2001)
    fit = np.polyval(coef, grid)
    band = 1.96 * np.sqrt(cov[0, 0] * grid**2 + 2 * cov[0, 1] * grid + cov[1, 1])

    def root(values: np.ndarray) -> float | None:
        s = np.nonzero(np.diff(np.sign(values)))[0]
        return float(np.exp(grid[s[0]])) if len(s) else None

    return root(fit), root(fit - band), root(fit + band)


def fmt(x: float | None) -> str:
    return "not bracketed" if x is None else f"{x:.3f}%"


def report(name: str, r: dict) -> list[tuple[float | None, float | None, float | None]]:
    print(f"{name}:")
    out = []
    for d in DISTANCES[:-1]:
        best, low, high = pair_crossing(r, d)
        out.append((best, low, high))
        print(f"  d = {d}/{d + 2}: crossing {fmt(best)} [{fmt(low)}, {fmt(high)}] (95%)")
    return out


def main() -> None:
    a = args_of()
    t0 = time.monotonic()
    console = Console(stderr=True)
    target = planner.parse_target(TOML, source="bench/sd6_threshold.py")
    tasks = []
    for p in GRID:
        s = p / 1.0  # the preset's p is 1%: joint scale = p / 1%
        scales = {c: s for c in planner.COMPONENTS}
        for d in DISTANCES:
            tasks += planner.tasks_at_rounds(target, scales, distance=d, rounds=(d, 3 * d), label="joint", factor=s)
    with tempfile.TemporaryDirectory() as tmp:
        store = planner.SampleStore(Path(a.out) if a.out else Path(tmp) / "sd6")
        planner.run_sweep(tasks, store=store, rule=planner.StoppingRule(max_errors=a.errors, max_shots=a.max_shots),
                          workers=a.workers, console=console)
        stats = store.stats()
    both = report("per-cycle rate from planner.fit_stats over r = d and 3d (boundary-free: the fidelity decay "
                  "between the two round counts)", rates(stats, lambda m: True))
    report("per-cycle rate at r = d only (single round count)", rates(stats, lambda m: m["rounds"] == m["d"]))
    report("per-cycle rate at r = 3d only (single round count)", rates(stats, lambda m: m["rounds"] == 3 * m["d"]))
    print("published: 0.5% - 0.7% (Gidney, Newman, Fowler, Broughton, Quantum 5, 605 (2021), abstract); "
          "0.502% - 1.140% (Stephens, PRA 89, 022321 (2014), abstract, across circuits and decoders)")
    print(f"wall time {time.monotonic() - t0:.0f} s with {a.workers} workers")
    best, low, high = both[-1]  # the largest pair says most about the asymptotic threshold
    print(f"sd6_crossing_percent={fmt(best).rstrip('%')} [{fmt(low).rstrip('%')}, {fmt(high).rstrip('%')}] "
          "published=0.5-0.7,0.502-1.140")


if __name__ == "__main__":
    sys.exit(main())
