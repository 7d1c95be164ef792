"""The engines behind one interface: local sinter processes, or a dask cluster.

An engine is a context manager with ``run(items, sink)``: sample every item until it meets
what it has left (shots or errors), handing each finished chunk to ``sink`` at once. Drivers
(:mod:`planner.sampling.uniform`, :mod:`planner.sampling.targeted`) never ask which engine they
have. Entry points are import-safe (sinter starts its workers with ``spawn``).
"""

from __future__ import annotations

import contextlib
from collections.abc import Sequence
from typing import Any, Protocol

import sinter
from rich.console import Console

from planner.sampling.dask import ClusterSpec, parse_cluster
from planner.sampling.leakage import leakage_samplers
from planner.sampling.work import ChunkSink, WorkItem, check_workers, default_workers


class Engine(Protocol):
    """What a driver needs of an engine (use it as a context manager around the runs)."""

    def __enter__(self) -> Engine: ...

    def __exit__(self, *exc: Any) -> None: ...

    def prepare(self) -> None:
        """Get ready to sample (start a local cluster); called only when there is work."""

    def run(self, items: Sequence[WorkItem], sink: ChunkSink) -> None:
        """Sample ``items`` (largest first) until each meets what it has left."""


def run_local(items: Sequence[WorkItem], *, workers: int, sink: ChunkSink) -> None:
    """Sample with ``sinter.iter_collect``, each task capped at what it has left; every stats
    entry sinter reports (one finished batch) goes to ``sink`` at once."""
    from planner.sampling.orphans import GuardToken

    tasks = [_capped(it) for it in items]
    # the token makes each worker exit when this process dies (see planner.sampling.orphans)
    for progress in sinter.iter_collect(num_workers=workers, tasks=tasks, hint_num_tasks=len(tasks),
                                        custom_decoders={GuardToken.NAME: GuardToken(),
                                                                         **leakage_samplers()}):
        for stats in progress.new_stats:
            if stats.shots:
                sink(stats, None)


def _capped(item: WorkItem) -> sinter.Task:
    t = item.task
    return sinter.Task(circuit=t.circuit, decoder=t.decoder, detector_error_model=t.detector_error_model,
                       json_metadata=t.json_metadata,
                       collection_options=sinter.CollectionOptions(max_shots=item.shots_left,
                                                                   max_errors=item.errors_left))


class LocalEngine:
    """sinter's own worker processes on this machine (``workers`` of them; default: all cores)."""

    def __init__(self, workers: int | None = None) -> None:
        self.workers = check_workers(workers) or default_workers()

    def __enter__(self) -> LocalEngine:
        return self

    def __exit__(self, *exc: Any) -> None:
        return None

    def prepare(self) -> None:
        return None

    def run(self, items: Sequence[WorkItem], sink: ChunkSink) -> None:
        if items:
            run_local(items, workers=self.workers, sink=sink)


class DaskEngine:
    """One dask connection for a whole job. A scheduler address is reached on entering (so a
    wrong address fails before anything is written); a local cluster is started by
    :meth:`prepare` (only a job that samples starts one)."""

    def __init__(self, spec: ClusterSpec, console: Console) -> None:
        self.spec = spec
        self.console = console
        self._stack = contextlib.ExitStack()
        self._client: Any = None

    def prepare(self) -> None:
        if self._client is None:
            from planner.sampling.dask import connect

            self._client = self._stack.enter_context(connect(self.spec, self.console))

    def __enter__(self) -> DaskEngine:
        if self.spec.address is not None:
            self.prepare()
        return self

    def __exit__(self, *exc: Any) -> None:
        self._stack.__exit__(*exc)

    def run(self, items: Sequence[WorkItem], sink: ChunkSink) -> None:
        if not items:
            return
        from planner.sampling.chunks import drive_chunks

        self.prepare()
        drive_chunks(self._client, items, sink, console=self.console)


def engine_for(*, workers: int | None, cluster: str | None, console: Console) -> LocalEngine | DaskEngine:
    """The engine for ``cluster`` (``local:N`` or a scheduler address) or, without one, local
    sinter with ``workers`` processes. Bad values are InputErrors naming the field."""
    check_workers(workers)
    if cluster is None:
        return LocalEngine(workers)
    return DaskEngine(parse_cluster(cluster), console)  # the cluster's workers sample
