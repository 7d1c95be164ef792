"""The uniform driver: top every task up to the stopping rule, locally with sinter, on a dask
cluster, or as one share of a sharded job; every finished chunk goes to the store as its own row.

Entry points are import-safe (sinter starts its workers with ``spawn``): nothing runs at import.
"""

from __future__ import annotations

import dataclasses
import time
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import rich.markup
import sinter
from rich.console import Console

from planner.errors import InputError
from planner.sampling.engine import engine_for
from planner.sampling.progress import SweepProgress
from planner.sampling.setup import ChunkCounts, SweepRecord, recording_sink, sweep_setup
from planner.sampling.work import WorkItem, remaining, shard_share, sharded_name
from planner.sweep import StoppingRule

if TYPE_CHECKING:
    from planner.config import Target
    from planner.store import SampleStore


@dataclasses.dataclass(frozen=True)
class SweepSummary:
    """What one ``run_sweep`` call did. Counts are for this job's tasks only."""

    tasks: int
    already_done: int
    sampled_tasks: int
    new_shots: int
    new_errors: int
    new_chunks: int
    wall_seconds: float
    complete: bool
    shard_file: Path | None
    totals: tuple[sinter.TaskStats, ...]


def items_to_sample(tasks: Sequence[sinter.Task], ids: Sequence[str],
                    have: dict[str, sinter.TaskStats], rule: StoppingRule) -> list[WorkItem]:
    """The tasks that do not yet meet ``rule`` given what is stored, largest circuits first."""
    items = []
    for task, sid in zip(tasks, ids):
        shots_left, errors_left = remaining(have.get(sid), rule)
        if shots_left:
            items.append(WorkItem(task=task, strong_id=sid, shots_left=shots_left, errors_left=errors_left))
    items.sort(key=lambda it: -it.size)
    return items


def run_sweep(tasks: Sequence[sinter.Task], *, store: SampleStore, rule: StoppingRule,
              workers: int | None = None, cluster: str | None = None,
              shard: tuple[int, int] | None = None, console: Console | None = None,
              target: Target | None = None, budget: str | None = None) -> SweepSummary:
    """Top every task up to ``rule``, counting what ``store`` already holds.

    ``cluster``: ``"local:N"`` or a dask scheduler address (see :mod:`planner.sampling.dask`).
    ``shard``: ``(K, N)`` to take job K's share of the tasks and write ``shard-K-of-N.csv``.
    ``target``: when given, the out directory's manifest and target copy are written (or
    checked: another target or other versions are refused). Running again when every task
    meets the rule samples nothing and says so.
    """
    console = console if console is not None else Console(stderr=True)
    if shard is not None and cluster is not None:
        raise InputError("cannot be combined with a cluster: a shard job samples locally",
                         field="shard")
    engine = engine_for(workers=workers, cluster=cluster, console=console)
    record = SweepRecord(budget=budget, max_errors=rule.max_errors, max_shots=rule.max_shots)
    with sweep_setup(tasks, store=store, engine=engine, target=target, record=record,
                     shared=shard is not None) as setup:
        resolved, ids = setup.tasks, setup.ids
        if shard is not None:
            mine = shard_share(ids, shard)
            keep = [k for k, sid in enumerate(ids) if sid in mine]
            resolved, ids = [resolved[k] for k in keep], [ids[k] for k in keep]
        t0 = time.monotonic()
        have = store.stats_by_id()
        items = items_to_sample(resolved, ids, have, rule)
        where = f" (shard {shard[0]}/{shard[1]})" if shard else ""
        if not items:
            console.print(f"all {len(ids)} tasks{where} already meet the stopping rule "
                          f"({rule.max_errors} errors or {rule.max_shots:,} shots): nothing to sample",
                          soft_wrap=True)
            return SweepSummary(tasks=len(ids), already_done=len(ids), sampled_tasks=0, new_shots=0,
                                new_errors=0, new_chunks=0, wall_seconds=time.monotonic() - t0,
                                complete=True, shard_file=None, totals=_totals(have, ids))
        setup.engine.prepare()  # a local cluster is started only when there is work
        console.print(f"sampling {len(items)} of {len(ids)} tasks{where} until {rule.max_errors:,} "
                      f"errors or {rule.max_shots:,} shots each ({len(ids) - len(items)} already "
                      f"there) -> {rich.markup.escape(str(setup.out))}", soft_wrap=True)
        counts = ChunkCounts()
        shard_name = sharded_name(index=shard[0], count=shard[1]) if shard else None
        with store.writer(shard_name) as writer, SweepProgress(items, rule, console) as bar:
            setup.engine.run(items, recording_sink(writer, counts, bar.add))
            shard_file = writer.path
        after = store.stats_by_id()
    return _finish(console, counts, t0=t0, ids=ids, items=items, after=after, rule=rule,
                   shard_file=shard_file)


def _finish(console: Console, counts: ChunkCounts, *, t0: float, ids: Sequence[str],
            items: Sequence[WorkItem], after: dict[str, sinter.TaskStats], rule: StoppingRule,
            shard_file: Path) -> SweepSummary:
    complete = all(remaining(after.get(sid), rule) == (0, 0) for sid in ids)
    wall = time.monotonic() - t0
    console.print(f"sampled {counts.shots:,} shots ({counts.errors:,} errors) in "
                  f"{counts.chunks} chunks, {wall:.1f} s -> {rich.markup.escape(str(shard_file))}"
                  + ("" if complete else "; some tasks are not yet complete: run again to top up"),
                  soft_wrap=True)
    return SweepSummary(tasks=len(ids), already_done=len(ids) - len(items), sampled_tasks=len(items),
                        new_shots=counts.shots, new_errors=counts.errors, new_chunks=counts.chunks,
                        wall_seconds=wall, complete=complete, shard_file=shard_file,
                        totals=_totals(after, ids))


def _totals(have: dict[str, sinter.TaskStats], ids: Sequence[str]) -> tuple[sinter.TaskStats, ...]:
    return tuple(have[sid] for sid in ids if sid in have)
