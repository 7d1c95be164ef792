"""Sampling: top every task up to the stopping rule, locally with sinter, on a dask cluster, or
as one share of a sharded job; every finished chunk goes to the store as its own row.

Entry points are import-safe (sinter starts its workers with ``spawn``): nothing runs at import.
"""

from __future__ import annotations

import contextlib
import dataclasses
import os
import re
import time
from collections.abc import Callable, Iterator, Sequence
from pathlib import Path
from typing import TYPE_CHECKING

import sinter
from rich.console import Console
import rich.markup
from rich.progress import BarColumn, Progress, TaskProgressColumn, TextColumn, TimeRemainingColumn

from planner.errors import InputError
from planner.manifest import Manifest, prepare_out_dir, resolved_task
from planner.store import SampleStore, sharded_name
from planner.sweep import StoppingRule

if TYPE_CHECKING:
    from planner.config import Target

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


def parse_shard(text: str) -> tuple[int, int]:
    """``"K/N"`` (1 <= K <= N) to ``(K, N)``; bad syntax is an InputError.

    >>> parse_shard("2/5")
    (2, 5)
    """
    m = re.fullmatch(r"\s*(\d+)\s*/\s*(\d+)\s*", text)
    if not m or not (1 <= int(m[1]) <= int(m[2])):
        raise InputError(f"--shard: {text!r} is not K/N with 1 <= K <= N (e.g. 1/4 ... 4/4)")
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


def check_workers(workers: int | None, *, option: str = "--workers") -> int | None:
    """``workers`` if a machine can hold that many processes, else an InputError naming ``option``.

    >>> check_workers(None), check_workers(1)
    (None, 1)
    """
    if workers is None:
        return None
    if workers < 1:
        raise InputError(f"{option}: {workers} is not allowed (>= 1)")
    if workers > max_workers():
        raise InputError(f"{option}: {workers} worker processes is more than this machine can run "
                         f"(at most {max_workers()}: {WORKERS_PER_CORE} per core, "
                         f"{os.cpu_count() or 1} cores here)")
    return workers


#: seconds between progress lines when stderr is a log file or a pipe, not a terminal
LOG_PROGRESS_EVERY_S = 15.0


class SweepProgress:
    """Progress on stderr: fraction of the stopping rule reached, summed over tasks.

    On a terminal a live bar; in a log (stderr not a terminal) a whole line every
    :data:`LOG_PROGRESS_EVERY_S` seconds and one at the end, never cut to the console width.
    """

    def __init__(self, items: Sequence[WorkItem], rule: StoppingRule, console: Console) -> None:
        self.rule = rule
        self.console = console
        self.start = {it.strong_id: (rule.max_shots - it.shots_left, rule.max_errors - it.errors_left)
                      for it in items}
        self.now = dict(self.start)
        self.total = len(items)
        self.shots = 0
        self.errors = 0
        self.t0 = time.monotonic()
        self._live = console.is_terminal and not console.quiet
        self._logged = self.t0
        self._bar = Progress(TextColumn("[bold]sampling[/]"), BarColumn(), TaskProgressColumn(),
                             TextColumn("{task.fields[counts]}"), TimeRemainingColumn(),
                             console=console, disable=not self._live, transient=False)
        self._id = self._bar.add_task("sweep", total=float(len(items)), counts="",
                                      completed=self._done())

    def _counts(self) -> str:
        rate = self.shots / max(time.monotonic() - self.t0, 1e-9)
        left = sum(1 for s, e in self.now.values() if self._fraction(s, e) < 1.0)
        return (f"{self.shots:,} shots, {self.errors:,} errors, {rate:,.0f} shots/s, "
                f"{left} tasks left")

    def log_line(self) -> str:
        """The progress as one plain line (for logs)."""
        share = self._done() / self.total if self.total else 1.0
        return f"sampling: {100 * share:.0f}% of the budget, {self._counts()}"

    def _log(self) -> None:
        self._logged = time.monotonic()
        if not self.console.quiet:
            self.console.print(self.log_line(), soft_wrap=True, markup=False, highlight=False)

    def _fraction(self, shots: int, errors: int) -> float:
        return min(1.0, max(shots / self.rule.max_shots, errors / self.rule.max_errors))

    def _done(self) -> float:
        return sum(self._fraction(s, e) for s, e in self.now.values())

    def add(self, stats: sinter.TaskStats) -> None:
        s, e = self.now.get(stats.strong_id, (0, 0))
        self.now[stats.strong_id] = (s + stats.shots, e + stats.errors)
        self.shots += stats.shots
        self.errors += stats.errors
        if self._live:
            self._bar.update(self._id, completed=self._done(), counts=self._counts())
        elif time.monotonic() - self._logged >= LOG_PROGRESS_EVERY_S:
            self._log()

    def __enter__(self) -> SweepProgress:
        if self._live:
            self._bar.start()
        return self

    def __exit__(self, exc_type: object, *exc: object) -> None:
        if self._live:
            self._bar.stop()
        elif exc_type is None and self.shots:
            self._log()


def run_local(items: Sequence[WorkItem], *, workers: int, sink: ChunkSink) -> None:
    """Sample with ``sinter.iter_collect``, each task capped at what it has left; every stats
    entry sinter reports (one finished batch) goes to ``sink`` at once."""
    from planner.orphans import GuardToken

    tasks = [_capped(it) for it in items]
    # the token makes each worker exit when this process dies (see planner.orphans)
    for progress in sinter.iter_collect(num_workers=workers, tasks=tasks, hint_num_tasks=len(tasks),
                                        custom_decoders={GuardToken.NAME: GuardToken()}):
        for stats in progress.new_stats:
            if stats.shots:
                sink(stats, None)


def _capped(item: WorkItem) -> sinter.Task:
    t = item.task
    return sinter.Task(circuit=t.circuit, decoder=t.decoder, detector_error_model=t.detector_error_model,
                       json_metadata=t.json_metadata,
                       collection_options=sinter.CollectionOptions(max_shots=item.shots_left,
                                                                   max_errors=item.errors_left))


def out_dir_of(store: SampleStore) -> Path:
    return store.root if store.samples_dir != store.root else store.samples_dir.parent


def run_sweep(tasks: Sequence[sinter.Task], *, store: SampleStore, rule: StoppingRule,
              workers: int | None = None, cluster: str | None = None,
              shard: tuple[int, int] | None = None, console: Console | None = None,
              target: Target | None = None, budget: str | None = None) -> SweepSummary:
    """Top every task up to ``rule``, counting what ``store`` already holds.

    ``cluster``: ``"local:N"`` or a dask scheduler address (see :mod:`planner.cluster`).
    ``shard``: ``(K, N)`` to take job K's share of the tasks and write ``shard-K-of-N.csv``.
    ``target``: when given, the out directory's manifest and target copy are written (or
    checked: another target or other versions are refused). Running again when every task
    meets the rule samples nothing and says so.
    """
    console = console if console is not None else Console(stderr=True)
    if shard is not None and cluster is not None:
        raise InputError("--shard and --cluster cannot be combined: a shard job samples locally")
    check_workers(workers)
    spec = None
    if cluster is not None:
        from planner.cluster import parse_cluster

        spec = parse_cluster(cluster)
    resolved = [resolved_task(t) for t in tasks]
    ids = [t.strong_id() for t in resolved]
    if len(set(ids)) != len(ids):
        raise ValueError("two tasks have the same strong id (identical circuit, decoder and metadata)")
    out = out_dir_of(store)
    with _sampling_lock(out, shared=shard is not None) as stack:
        if spec is not None and spec.address is not None:
            # reach the cluster before the manifest is written: a wrong address leaves nothing
            client = stack.enter_context(_connect(spec, console))
        if target is not None:
            manifest = Manifest.for_sweep(target_sha256=target.sha256, target_name=target.name,
                                          sample_sha256=target.sampling_sha256,
                                          tasks=resolved, budget=budget, max_errors=rule.max_errors,
                                          max_shots=rule.max_shots)
            prepare_out_dir(out, target_bytes=target_bytes_of(target), manifest=manifest)
        if shard is not None:
            mine = shard_share(ids, shard)
            keep = [k for k, sid in enumerate(ids) if sid in mine]
            resolved, ids = [resolved[k] for k in keep], [ids[k] for k in keep]
        t0 = time.monotonic()
        store.repair()
        have = store.stats_by_id()
        items = []
        for task, sid in zip(resolved, ids):
            shots_left, errors_left = remaining(have.get(sid), rule)
            if shots_left:
                items.append(WorkItem(task=task, strong_id=sid, shots_left=shots_left,
                                      errors_left=errors_left))
        items.sort(key=lambda it: -it.size)
        where = f" (shard {shard[0]}/{shard[1]})" if shard else ""
        if not items:
            console.print(f"all {len(ids)} tasks{where} already meet the stopping rule "
                          f"({rule.max_errors} errors or {rule.max_shots:,} shots): nothing to sample",
                          soft_wrap=True)
            return SweepSummary(tasks=len(ids), already_done=len(ids), sampled_tasks=0, new_shots=0,
                                new_errors=0, new_chunks=0, wall_seconds=time.monotonic() - t0,
                                complete=True, shard_file=None, totals=_totals(have, ids))
        if spec is not None and spec.local_workers is not None:
            client = stack.enter_context(_connect(spec, console))  # started only when needed
        console.print(f"sampling {len(items)} of {len(ids)} tasks{where} until {rule.max_errors:,} "
                      f"errors or {rule.max_shots:,} shots each ({len(ids) - len(items)} already "
                      f"there) -> {rich.markup.escape(str(out))}", soft_wrap=True)
        counts = {"shots": 0, "errors": 0, "chunks": 0}
        shard_name = sharded_name(index=shard[0], count=shard[1]) if shard else None
        with store.writer(shard_name) as writer, SweepProgress(items, rule, console) as bar:

            def sink(stats: sinter.TaskStats, chunk_id: str | None) -> None:
                writer.append(stats, chunk_id=chunk_id)
                counts["shots"] += stats.shots
                counts["errors"] += stats.errors
                counts["chunks"] += 1
                bar.add(stats)

            if spec is not None:
                from planner.cluster import drive_chunks

                drive_chunks(client, items, sink, console=console)
            else:
                run_local(items, workers=workers or default_workers(), sink=sink)
            shard_file = writer.path
        after = store.stats_by_id()
    complete = all(remaining(after.get(sid), rule) == (0, 0) for sid in ids)
    wall = time.monotonic() - t0
    console.print(f"sampled {counts['shots']:,} shots ({counts['errors']:,} errors) in "
                  f"{counts['chunks']} chunks, {wall:.1f} s -> {rich.markup.escape(str(shard_file))}"
                  + ("" if complete else "; some tasks are not yet complete: run again to top up"),
                  soft_wrap=True)
    return SweepSummary(tasks=len(ids), already_done=len(ids) - len(items), sampled_tasks=len(items),
                        new_shots=counts["shots"], new_errors=counts["errors"],
                        new_chunks=counts["chunks"], wall_seconds=wall, complete=complete,
                        shard_file=shard_file, totals=_totals(after, ids))


def _connect(spec: object, console: Console) -> contextlib.AbstractContextManager[object]:
    from planner.cluster import connect

    return connect(spec, console)  # type: ignore[arg-type]


@contextlib.contextmanager
def _sampling_lock(out: Path, *, shared: bool) -> Iterator[contextlib.ExitStack]:
    """Create ``out`` if needed and hold its sampling lock (see :mod:`planner.lock`); yields an
    ExitStack closed before the lock is released. A directory this call created is removed
    again when the job fails and leaves it empty (an unreachable cluster leaves nothing)."""
    from planner.lock import out_dir_lock
    from planner.manifest import writable_dir

    created = not out.exists()
    writable_dir(out)
    ok = False
    try:
        with out_dir_lock(out, shared=shared), contextlib.ExitStack() as stack:
            yield stack
        ok = True
    finally:
        if created and not ok:
            with contextlib.suppress(OSError):
                out.rmdir()  # only if empty


def _totals(have: dict[str, sinter.TaskStats], ids: Sequence[str]) -> tuple[sinter.TaskStats, ...]:
    return tuple(have[sid] for sid in ids if sid in have)


def target_bytes_of(target: Target) -> bytes:
    import hashlib

    try:
        data = Path(target.source).read_bytes()
    except OSError as exc:
        raise InputError(f"{target.source}: cannot read the target file to copy it ({exc})") from None
    if hashlib.sha256(data).hexdigest() != target.sha256:
        raise InputError(f"{target.source}: changed while the sweep was being planned; run again")
    return data


# ---------------------------------------------------------------------------------------------
# status: how far each task is against the budget


@dataclasses.dataclass(frozen=True)
class TaskStatus:
    """One task's samples against the stopping rule.

    ``relative_width``: (high - low) / best of the interval on the logical error per shot (None
    with no errors); ``shots_left``: estimated shots until the rule is met (errors projected at
    the measured rate); ``cpu_seconds_left``: that times the measured CPU seconds per shot.
    """

    strong_id: str
    decoder: str
    json_metadata: object
    shots: int
    errors: int
    discards: int
    seconds: float
    rate_low: float
    rate_best: float
    rate_high: float
    relative_width: float | None
    done: bool | None
    shots_left: int | None
    cpu_seconds_left: float | None


def task_status(stats: sinter.TaskStats, *, rule: StoppingRule | None,
                likelihood_factor: float) -> TaskStatus:
    """Status of one task; ``rule`` None (no budget recorded) leaves done/left unknown."""
    if stats.shots > 0:
        fit = sinter.fit_binomial(num_shots=stats.shots - stats.discards, num_hits=stats.errors,
                                  max_likelihood_factor=likelihood_factor)
        low, best, high = fit.low, fit.best, fit.high
    else:
        low, best, high = 0.0, 0.0, 1.0
    width = (high - low) / best if best > 0 else None
    done = shots_left = cpu_left = None
    if rule is not None:
        shots_left_max, errors_left = remaining(stats if stats.shots else None, rule)
        done = shots_left_max == 0
        shots_left = shots_left_max
        if not done and stats.errors > 0:
            shots_left = min(shots_left_max, -(-errors_left * stats.shots // stats.errors))
        if stats.shots > 0 and stats.seconds > 0:
            cpu_left = shots_left * stats.seconds / stats.shots
        elif done:
            cpu_left = 0.0
    return TaskStatus(strong_id=stats.strong_id, decoder=stats.decoder,
                      json_metadata=stats.json_metadata, shots=stats.shots, errors=stats.errors,
                      discards=stats.discards, seconds=stats.seconds, rate_low=low, rate_best=best,
                      rate_high=high, relative_width=width, done=done, shots_left=shots_left,
                      cpu_seconds_left=cpu_left)


def store_status(store: SampleStore, *, manifest: Manifest | None,
                 likelihood_factor: float) -> list[TaskStatus]:
    """Every task of the manifest (those not yet sampled at 0 shots) and every stored task."""
    rule = None
    if manifest is not None and manifest.max_errors is not None and manifest.max_shots is not None:
        rule = StoppingRule(max_errors=manifest.max_errors, max_shots=manifest.max_shots)
    have = store.stats_by_id()
    order: dict[str, sinter.TaskStats] = {}
    for e in (manifest.tasks if manifest else ()):
        order[e.strong_id] = have.get(e.strong_id) or sinter.TaskStats(
            strong_id=e.strong_id, decoder=e.decoder, json_metadata=e.json_metadata)
    for sid, s in have.items():
        order.setdefault(sid, s)
    return [task_status(s, rule=rule, likelihood_factor=likelihood_factor) for s in order.values()]
