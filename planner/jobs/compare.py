"""The compare job: plan two out directories and put their answers side by side (the
comparison itself is pure: :mod:`planner.planning.compare`)."""

from __future__ import annotations

from pathlib import Path

from planner.errors import InputError
from planner.jobs.review import review
from planner.planning.compare import Comparison, compare_answers

__all__ = ["Comparison", "compare_directories"]


def compare_directories(dir_a: str | Path, dir_b: str | Path, *, replicas: int = 200, seed: int = 0) -> Comparison:
    """Read and plan both directories (each for its own goal) and compare them, A the reference."""
    if Path(dir_a).resolve() == Path(dir_b).resolve():
        raise InputError(f"{dir_b}: is the same directory as {dir_a}; give two out directories to compare")
    a = review(dir_a, replicas=replicas, seed=seed)
    b = review(dir_b, replicas=replicas, seed=seed)
    name = lambda r, d: f"{r.target.device.name} ({Path(d).name})"  # noqa: E731
    return compare_answers(a.answers, b.answers, name_a=name(a, dir_a), name_b=name(b, dir_b))
