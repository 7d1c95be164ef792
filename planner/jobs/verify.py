"""The verify job: sample the proposed operating points into ``DIR/verify`` and compare them
with the model's prediction (the comparison itself is pure: :mod:`planner.planning.verify`)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

from planner.config import Target
from planner.planning import Answers
from planner.planning.verify import Verification, compare, operating_points, verify_distances

__all__ = ["Verification", "compare", "operating_points", "run_verification", "verify_distances"]


def run_verification(target: Target, answers: Answers, *, out_dir: Path, budget: str = "quick",
                     workers: int | None = None, console: Any = None) -> Verification:
    """Sample the operating points into ``out_dir/verify`` (resumable) and compare."""
    from planner.sampling import run_sweep
    from planner.store import SampleStore
    from planner.sweep import budget_rule, tasks_for_scales

    points = operating_points(answers)
    distances = verify_distances(answers.fits.sampled_distances)
    rule = budget_rule(budget)
    store = SampleStore(Path(out_dir) / "verify")
    tasks = [t for p in points
             for t in tasks_for_scales(target, p.scales, distances=distances, label=p.label, factor=p.factor)]
    if tasks:
        run_sweep(tasks, store=store, rule=rule, workers=workers, console=console)
    return compare(answers, points, distances, store.stats())
