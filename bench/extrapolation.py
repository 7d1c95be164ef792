"""How well the answer holds beyond the fit: the demo's joint-factor answer sampled independently.

On the demo target (invented device): sweep it as ``planner run`` does, with the joint axis also
at the reach distances (``sweep.reach_distances = "auto"``: d = 9, 11; ``--no-reach`` for the
demo file as it is, the grid alone), take the
joint-factor answer for the goal, then sample that operating point afresh, into its own store,
at d = 9, 11, 13 (and the goal distance with ``--full``), each at r = d and 3d rounds in both
bases, and compare the per-cycle rate planner's fits give for those samples with the model's
prediction and its interval (95% both). Everything goes through the public API (``planner.__all__``).

The per-cycle rates come from ``planner.fit_stats`` on the two round counts (boundary-free: the
fidelity decay between them, :mod:`planner.fits.decay`).

Run:  .venv/bin/python bench/extrapolation.py [--workers 2] [--full] [--errors 200]
Last line: ``max_abs_log_ratio=X coverage=K/N`` (X = max |ln(sampled / predicted)| over the
distances; K of N sampled rates inside the predicted interval). Target: K = N and X <= 0.10.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from pathlib import Path

from rich.console import Console

import planner


def args_of() -> argparse.Namespace:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--target", default="targets/demo.toml")
    ap.add_argument("--out", default="out/bench_extrapolation", help="sweep and samples go here (resumable)")
    ap.add_argument("--workers", type=int, default=2)
    ap.add_argument("--budget", default="quick", help="the demo sweep's budget")
    ap.add_argument("--errors", type=int, default=200, help="errors per independent task")
    ap.add_argument("--max-shots", type=int, default=50_000_000, help="shots per independent task at most")
    ap.add_argument("--distances", default="9,11,13")
    ap.add_argument("--full", action="store_true", help="also sample the goal distance (hours of CPU)")
    ap.add_argument("--no-reach", action="store_true", help="sweep the grid only (no reach distances)")
    ap.add_argument("--reuse", action="store_true",
                    help="answer from the sweep already in OUT (as it was sampled), sampling no more there")
    return ap.parse_args()


def sweep(target: planner.Target, out: Path, a: argparse.Namespace, console: Console) -> planner.Answers:
    if a.reuse:
        return planner.review(out).answers
    plan = (planner.plan_sweep(target, a.budget) if a.no_reach else planner.plan_with_reach(target, a.budget))
    planner.run_sweep(plan.tasks, store=planner.SampleStore(out), rule=plan.rule, workers=a.workers,
                      console=console, target=target, budget=a.budget)
    return planner.review(out).answers


def rows_text(v: planner.Verification) -> tuple[list[str], float, int, int]:
    lines, worst, inside, judged = [], 0.0, 0, 0
    for r in v.rows:
        if r.quantity != "logical_error_per_cycle" or r.sampled is None:
            continue
        p, s = r.predicted, r.sampled
        ratio = math.log(s.best / p.best) if s.best > 0 and p.best > 0 else math.inf
        worst = max(worst, abs(ratio))
        judged += r.covered is not None
        inside += bool(r.covered)
        lines.append(f"  d={r.distance:>2}  predicted {p.best:.3e} [{p.low:.3e}, {p.high:.3e}]  "
                     f"sampled {s.best:.3e} [{s.low:.3e}, {s.high:.3e}]  ln(sampled/predicted) = {ratio:+.3f}  "
                     + ("inside" if r.covered else "bound only" if r.covered is None else f"OUTSIDE (widen x{r.widen:.2f})"))
    return lines, worst, inside, judged


def main() -> None:
    a = args_of()
    t0 = time.monotonic()
    console = Console(stderr=True)
    out = Path(a.out)
    path = Path(a.target)
    text = path.read_text(encoding="utf-8")
    if not a.no_reach and "reach_distances" not in text:  # the demo file with the reach distances on
        out.mkdir(parents=True, exist_ok=True)
        path = out / "demo_with_reach.toml"
        path.write_text(text.replace("[sweep]", '[sweep]\nreach_distances = "auto"', 1), encoding="utf-8")
    target = planner.load_target(path)
    answers = sweep(target, out / ("sweep-grid" if a.no_reach else "sweep"), a, console)
    req = answers.requirements
    if req is None or not req.joint.reachable:
        raise SystemExit("the demo's joint-factor answer is not reachable: nothing to verify")
    point = next(p for p in planner.operating_points(answers) if p.label == "verify-joint")
    distances = [int(d) for d in a.distances.split(",")] + ([req.distance] if a.full else [])
    tasks = [t for d in distances for t in planner.tasks_at_rounds(
        target, point.scales, distance=d, rounds=(d, 3 * d), label=point.label, factor=point.factor)]
    store = planner.SampleStore(out / "independent")
    planner.run_sweep(tasks, store=store, rule=planner.StoppingRule(max_errors=a.errors, max_shots=a.max_shots),
                      workers=a.workers, console=console)
    v = planner.compare_predictions(answers, [point], distances, store.stats())
    fitted = answers.fits.sampled_distances
    iv = req.joint.factor_interval
    print(f"demo target {target.name!r}: fitted on d = {', '.join(map(str, fitted))}"
          + (" (grid only)" if a.no_reach else " (grid + reach distances on the joint axis)"))
    print(f"joint-factor answer for eps {req.eps_target:g} at d = {req.distance}: {req.joint.factor:.4f}"
          + (f" [{iv.low:.4f}, {iv.high:.4f}] (95%)" if iv is not None else ""))
    print("per-cycle rates from planner.fit_stats over r = d and 3d, both bases; intervals 95%; "
          f"predictions beyond d = {max(fitted)} are extrapolations")
    lines, worst, inside, judged = rows_text(v)
    print("\n".join(lines))
    at_d = [s for s in store.stats() if s.json_metadata["rounds"] == s.json_metadata["d"]]
    for f in planner.fit_stats(at_d).distances if at_d else ():
        pred = next(r.predicted for r in v.rows if r.distance == f.distance and r.quantity != "suppression_factor")
        print(f"  d={f.distance:>2}  at r = d only (as the sweep samples): {f.per_cycle.best:.3e} "
              f"[{f.per_cycle.low:.3e}, {f.per_cycle.high:.3e}]  ln(/predicted) = {math.log(f.per_cycle.best / pred.best):+.3f}")
    lam = next((r for r in v.rows if r.quantity == "suppression_factor" and r.sampled is not None), None)
    if lam is not None:
        print(f"  Lambda over d = {', '.join(map(str, v.distances))}: predicted {lam.predicted.best:.3f} "
              f"[{lam.predicted.low:.3f}, {lam.predicted.high:.3f}], sampled {lam.sampled.best:.3f} "
              f"[{lam.sampled.low:.3f}, {lam.sampled.high:.3f}]")
    print(f"wall time {time.monotonic() - t0:.0f} s (with {a.workers} workers; resumed samples are not re-run)")
    print(f"max_abs_log_ratio={worst:.3f} coverage={inside}/{judged}")


if __name__ == "__main__":
    sys.exit(main())
