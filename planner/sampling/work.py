"""What a sampling job works on: tasks with what they still need, chunk ids, shares of a sharded
job and worker counts. Pure helpers; nothing here samples.
"""

from __future__ import annotations

import dataclasses
import os
import re
import secrets
from collections.abc import Callable, Sequence

import sinter

from planner.errors import InputError
from planner.sweep import StoppingRule

#: receives one finished chunk: its stats and its chunk id (None: the store makes one)
ChunkSink = Callable[[sinter.TaskStats, str | None], None]


@dataclasses.dataclass(frozen=True)
class WorkItem:
    """A task with what it still needs under the stopping rule (shots and errors left)."""

    task: sinter.Task  # detector error model filled in
    strong_id: str
    shots_left: int
    errors_left: int

    @property
    def size(self) -> int:
        """Rough cost per shot: detectors (for ordering largest circuits first)."""
        return self.task.circuit.num_detectors


def new_chunk_id() -> str:
    """A fresh, globally unique chunk id (128 random bits, hex).

    >>> len(new_chunk_id()), new_chunk_id() != new_chunk_id()
    (32, True)
    """
    return secrets.token_hex(16)


def parse_shard(text: str) -> tuple[int, int]:
    """``"K/N"`` (1 <= K <= N) to ``(K, N)``; bad syntax is an InputError.

    >>> parse_shard("2/5")
    (2, 5)
    """
    m = re.fullmatch(r"\s*(\d+)\s*/\s*(\d+)\s*", text)
    if not m or not (1 <= int(m[1]) <= int(m[2])):
        raise InputError(f"{text!r} is not K/N with 1 <= K <= N", field="shard",
                         allowed="K/N, e.g. --shard 1/4 ... --shard 4/4")
    return int(m[1]), int(m[2])


def shard_share(strong_ids: Sequence[str], shard: tuple[int, int]) -> set[str]:
    """The strong ids job K of N takes: every N-th id in sorted order, starting at K-1.

    Disjoint across K and together covering all ids, whatever order the tasks came in.

    >>> sorted(shard_share(["c", "a", "b"], (1, 2))), sorted(shard_share(["c", "a", "b"], (2, 2)))
    (['a', 'c'], ['b'])
    """
    k, n = shard
    if not 1 <= k <= n:
        raise ValueError(f"shard {k}/{n} out of range")
    return {sid for i, sid in enumerate(sorted(set(strong_ids))) if i % n == k - 1}


def sharded_name(*, index: int, count: int) -> str:
    """Shard file stem for job ``index`` of ``count`` (1-based).

    >>> sharded_name(index=2, count=8)
    'shard-2-of-8'
    """
    return f"shard-{index}-of-{count}"


def remaining(stats: sinter.TaskStats | None, rule: StoppingRule) -> tuple[int, int]:
    """(shots left, errors left) before ``rule`` is met; a met rule gives (0, 0).

    >>> remaining(None, StoppingRule(max_errors=10, max_shots=100))
    (100, 10)
    """
    shots = stats.shots if stats else 0
    errors = stats.errors if stats else 0
    if shots >= rule.max_shots or errors >= rule.max_errors:
        return 0, 0
    return rule.max_shots - shots, rule.max_errors - errors


def default_workers() -> int:
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


#: worker processes per core at most (more only queue for the same cores) and in all
WORKERS_PER_CORE = 4
MAX_WORKERS = 1024


def max_workers() -> int:
    """The most worker processes one machine may be asked for: 4 per core, at most 1024."""
    return min(MAX_WORKERS, WORKERS_PER_CORE * (os.cpu_count() or 1))


def check_workers(workers: int | None, *, prefix: str | None = None) -> int | None:
    """``workers`` if a machine can hold that many processes, else an InputError with field
    ``workers`` (``prefix``: the message names that instead, e.g. a cluster's ``local:N``).

    >>> check_workers(None), check_workers(1)
    (None, 1)
    """
    if workers is None:
        return None
    if workers < 1:
        raise _workers_error(prefix, f"{workers} is not allowed", allowed="a count >= 1 (e.g. --workers 4)")
    if workers > max_workers():
        raise _workers_error(prefix, f"{workers} worker processes is more than this machine can run "
                             f"(at most {max_workers()}: {WORKERS_PER_CORE} per core, "
                             f"{os.cpu_count() or 1} cores here)")
    return workers


def _workers_error(prefix: str | None, problem: str, allowed: str | None = None) -> InputError:
    if prefix is not None:
        return InputError(f"{prefix}: {problem}", allowed=allowed)
    return InputError(problem, field="workers", allowed=allowed)
