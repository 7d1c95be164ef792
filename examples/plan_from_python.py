"""Plan from Python: the demo's job (sample, fit, answer, write the report) through planner's API.

A small version of ``make demo``: the demo target at distances 3 and 5 only, each task sampled
to 200 logical errors or 100,000 shots, so it runs in well under a minute on 2 cores. The
numbers are the same kind the demo prints, with wider intervals.

Run:  .venv/bin/python examples/plan_from_python.py [--out DIR] [--workers N]
(without --out it works in a temporary directory and removes it afterwards).
"""

from __future__ import annotations

import argparse
import tempfile
from pathlib import Path

import planner

DEMO = Path(__file__).resolve().parent.parent / "targets" / "demo.toml"
RULE = planner.StoppingRule(max_errors=200, max_shots=100_000)


def interval(iv: planner.Interval | None, digits: int = 3) -> str:
    """``best [low, high]``, or a dash when there is no interval."""
    if iv is None:
        return "-"
    return f"{iv.best:.{digits}g} [{iv.low:.{digits}g}, {iv.high:.{digits}g}]"


def plan(work: Path, *, workers: int) -> None:
    # a target is a TOML file: write the smaller grid next to the samples and load it
    path = work / "demo-small.toml"
    path.write_text(DEMO.read_text().replace("distances = [3, 5, 7]", "distances = [3, 5]"))
    target = planner.load_target(path)

    # sample (run it again with the same out directory and it resumes: nothing is sampled twice)
    out = work / "out"
    sweep = planner.plan_sweep(target)
    store = planner.SampleStore(out)
    planner.run_sweep(sweep.tasks, store=store, rule=RULE, workers=workers, target=target,
                      budget="example: 200 errors or 100,000 shots")
    stats = store.stats()
    print(f"{target.device.name}: {len(sweep.tasks)} tasks, {sum(s.shots for s in stats):,} shots")

    # fit, then every answer at once (bootstrap intervals on everything derived from the model)
    answers = planner.answer_all(target, stats, replicas=100)
    today = answers.fits.today()
    print(f"Lambda today: {interval(today.suppression if today else None)} ({planner.CONFIDENCE:.0%} interval)")
    for note in answers.notes:
        print(f"note: {note}")
    req = answers.requirements
    if req is not None:
        print(f"goal {req.eps_target:g} per cycle: distance {req.distance}, {req.physical_qubits} physical qubits")
        joint = req.joint
        if joint.reachable and joint.factor is not None:
            iv = joint.factor_interval
            low_high = f" [{iv.low:.3g}, {iv.high:.3g}]" if iv is not None else ""
            print(f"joint factor: {joint.factor:.3g}{low_high} (every error times this meets the goal)")
        else:
            print(f"joint factor: not reachable ({joint.note})")
    if answers.roadmap is not None:
        goal = answers.roadmap.goal
        if goal.date is not None:
            span = f" [{goal.low}, {goal.high}]" if goal.low and goal.high else ""
            print(f"goal met: {goal.date}{span} ({goal.fraction_reached:.0%} of scenarios within the horizon)")
        else:
            print(f"goal met: not within the horizon ({goal.fraction_reached:.0%} of scenarios reach it)")

    written = planner.write_all(answers, out_dir=out, target=target)
    print(f"wrote {len(written)} files under {out} (report.html has it all on one page)")


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--out", type=Path, help="work here (kept) instead of a temporary directory")
    ap.add_argument("--workers", type=int, default=2)
    args = ap.parse_args()
    if args.out is not None:
        args.out.mkdir(parents=True, exist_ok=True)
        plan(args.out, workers=args.workers)
        return
    with tempfile.TemporaryDirectory() as tmp:
        plan(Path(tmp), workers=args.workers)


if __name__ == "__main__":
    main()
