"""The set-up every sampling driver shares: resolve the tasks, hold the out directory's lock,
reach the engine, record the sweep (manifest and target copy), repair torn shards; and the sink
that writes each finished chunk to the store and counts it.

The store is passed in (any object with the methods of :class:`planner.store.SampleStore` used
here): sampling writes to the store, it does not import it.
"""

from __future__ import annotations

import contextlib
import dataclasses
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import sinter

from planner.sampling.engine import Engine
from planner.sampling.work import ChunkSink
from planner.sweep import resolved_tasks

if TYPE_CHECKING:
    from planner.config import Target
    from planner.store import SampleStore


@dataclasses.dataclass(frozen=True)
class SweepSetup:
    """A prepared sweep: the tasks (detector error models filled in), their strong ids, the
    engine (entered) and the out directory (locked)."""

    tasks: list[sinter.Task]
    ids: list[str]
    engine: Engine
    out: Path


@dataclasses.dataclass(frozen=True)
class SweepRecord:
    """What the manifest records about the sweep's budget (None: nothing recorded)."""

    budget: str | None
    max_errors: int | None = None
    max_shots: int | None = None


@contextlib.contextmanager
def sweep_setup(tasks: Sequence[sinter.Task], *, store: SampleStore, engine: Engine,
                target: Target | None, record: SweepRecord, shared: bool = False) -> Iterator[SweepSetup]:
    """Resolve ``tasks``, lock the out directory (``shared``: a shard job), enter ``engine`` (a
    scheduler address is reached before anything is written), write or check the manifest and
    target copy (when ``target`` is given) and repair the shards no writer holds."""
    resolved, ids = resolved_tasks(tasks)
    with store.sampling_lock(shared=shared) as stack:
        stack.enter_context(engine)
        if target is not None:
            store.prepare_sweep(target=target, tasks=resolved, budget=record.budget,
                                max_errors=record.max_errors, max_shots=record.max_shots)
        store.repair()
        yield SweepSetup(tasks=resolved, ids=ids, engine=engine, out=store.out_dir)


@dataclasses.dataclass
class ChunkCounts:
    """Running totals of the chunks a job wrote."""

    shots: int = 0
    errors: int = 0
    chunks: int = 0
    seconds: float = 0.0

    def add(self, stats: sinter.TaskStats) -> None:
        self.shots += stats.shots
        self.errors += stats.errors
        self.chunks += 1
        self.seconds += stats.seconds


def recording_sink(writer: Any, counts: ChunkCounts,
                   also: Callable[[sinter.TaskStats], None] | None = None) -> ChunkSink:
    """A sink that appends each chunk to ``writer`` (a shard writer) at once, then counts it."""

    def sink(stats: sinter.TaskStats, chunk_id: str | None) -> None:
        writer.append(stats, chunk_id=chunk_id)
        counts.add(stats)
        if also is not None:
            also(stats)

    return sink
