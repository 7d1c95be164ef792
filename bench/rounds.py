"""How far the single-round-count estimate (r = d, what the sweep measured before) is from the
fidelity-decay estimate over r = d and r = 3d, on the demo target at today's point.

Samples the demo's joint x1 tasks (every distance, both bases, both round counts) with the quick
budget's stopping rule in a temporary out directory (or ``--out``), then prints per distance and
basis the single-round and the decay estimates of the logical error per cycle (95% intervals),
the boundary offset C, and today's Lambda fitted both ways.

Run:  .venv/bin/python bench/rounds.py [--workers 2] [--budget quick] [--out DIR | --from OUT_DIR]
The last line is ``max_abs_log_ratio_single_vs_decay=X`` (over distances, the rates the goal uses).
"""

from __future__ import annotations

import argparse
import dataclasses
import math
import sys
import tempfile
from pathlib import Path

import planner
from planner.fits import fit_lambda, log_sigma
from planner.reports.formats import interval

DEMO = Path(__file__).resolve().parent.parent / "targets" / "demo.toml"


def sample_today(target: planner.Target, *, out: Path, workers: int, budget: str) -> list:
    from rich.console import Console

    plan = planner.plan_sweep(target, budget=budget)
    today = [t for t in plan.tasks if t.json_metadata["axis"] == "joint" and t.json_metadata["factor"] == 1.0]
    store = planner.SampleStore(out)
    planner.run_sweep(today, store=store, rule=plan.rule, workers=workers, console=Console(stderr=True),
                      budget=budget)
    return store.stats()


def single_round_lambda(report: planner.FitReport):
    """Today's Lambda from the single-round (r = d) rates, with the decay fit's own weights rule."""
    pts = [dataclasses.replace(p, per_cycle=p.per_cycle_single_round,
                               log_sigma=log_sigma(p.per_cycle_single_round, zero_errors=p.zero_errors))
           for p in report.distances if p.axis == "joint" and p.factor == 1.0]
    return fit_lambda(pts)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--workers", type=int, default=2)
    parser.add_argument("--budget", default="quick")
    parser.add_argument("--out", type=Path, default=None, help="out directory (default: a temporary one)")
    parser.add_argument("--from", dest="source", type=Path, default=None,
                        help="read an existing out directory of the demo (e.g. out/demo) instead of sampling")
    args = parser.parse_args()
    target = planner.load_target(DEMO)
    if target.sweep.multiples is None or len(target.sweep.multiples) < 2:
        raise SystemExit("the demo target samples one round count: nothing to compare")
    if args.source is not None:
        stats = planner.SampleStore(args.source).stats()
    else:
        with tempfile.TemporaryDirectory() as tmp:
            out = args.out or Path(tmp) / "rounds"
            stats = sample_today(target, out=out, workers=args.workers, budget=args.budget)
    report = planner.fit_stats(stats, goal_basis=target.goal.basis)
    print(f"demo target, today's point (joint x1), budget {args.budget!r}, 95% intervals; "
          f"goal basis: {report.goal_basis}; round counts {target.sweep.multiples} x d")
    print(f"{'d':>3} {'basis':>5}  {'single (r=d)':>30}  {'decay':>30}  {'C':>26}  ln(single/decay)")
    worst = 0.0
    for p in sorted((p for p in report.distances if p.axis == "joint" and p.factor == 1.0), key=lambda p: p.distance):
        for f in p.per_basis:
            ratio = math.log(f.single_round.best / f.per_cycle.best)
            print(f"{p.distance:>3} {f.basis:>5}  {interval(f.single_round):>30}  {interval(f.per_cycle):>30}  "
                  f"{interval(f.offset, 4):>26}  {ratio:+.3f}" + (f"  ({f.method}: {f.note})" if f.note else ""))
        ratio = math.log(p.per_cycle_single_round.best / p.per_cycle.best)
        worst = max(worst, abs(ratio))
        print(f"{p.distance:>3} {p.combine:>5}  {interval(p.per_cycle_single_round):>30}  "
              f"{interval(p.per_cycle):>30}  {'':>26}  {ratio:+.3f}")
    decay, single = report.today(), single_round_lambda(report)
    print(f"Lambda today, single round count (r = d): {interval(single.suppression)}")
    print(f"Lambda today, decay over round counts:    {interval(decay.suppression)}")
    sys.stdout.flush()
    print(f"max_abs_log_ratio_single_vs_decay={worst:.4f}")


if __name__ == "__main__":
    main()
