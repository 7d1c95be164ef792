"""The review job: read an out directory (through :mod:`planner.store`) and plan from it.

Planning itself is pure (:mod:`planner.planning` never touches files); this job is where the
out directory's target copy and samples are read and handed to it.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Any


from planner.config import Target
from planner.planning import Answers, answer_all
from planner.planning.ask import what_if
from planner.planning.uncertainty import DEFAULT_REPLICAS
from planner.store import OutDirSamples, read_out_dir

__all__ = ["OutDirSamples", "Review", "load_out_dir", "review"]


#: The store reads an out directory back (target copy, the manifest's tasks, ignored and damaged
#: rows); the name stays for the code and notebooks that use it.
load_out_dir = read_out_dir


@dataclasses.dataclass(frozen=True, kw_only=True)
class Review:
    """An out directory planned: its target, the answers, and the question asked.

    ``what_if``: the options that ask another question than the target's goal (empty: the
    review's own question, the one the out directory's report files answer).
    """

    target: Target
    answers: Answers
    what_if: dict[str, Any] = dataclasses.field(default_factory=dict)


def review(directory: str | Path, *, eps_target: float | None = None, distance: int | None = None,
           qubits: int | None = None, replicas: int = DEFAULT_REPLICAS, seed: int = 0) -> Review:
    """Read ``directory`` and answer every question for its goal (or the what-if asked)."""
    target, stats = load_out_dir(directory)
    asked = what_if(target, eps_target=eps_target, distance=distance, qubits=qubits)
    answers = answer_all(target, stats, replicas=replicas, seed=seed, **asked)
    return Review(target=target, answers=answers, what_if=asked)
