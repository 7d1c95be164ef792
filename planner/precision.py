"""Precision-targeted sampling: spend CPU where the answers need it, stop when they are precise.

A uniform sweep gives every task the same number of errors. Here the sweep runs in rounds; each
round fits what the store holds, measures how precise the tracked answers are
(:mod:`planner.precision_answers`: Lambda per point, the weights that matter, the joint factor
at the goal distance), and lets the pure allocator (:mod:`planner.precision_alloc`) put the
next shots where they shrink the unmet variances most per CPU second. The first pass gives every
task :data:`MIN_ERRORS` errors (or its cap), so every task an answer depends on has data.

Sampling goes through the same engines and the same store as ``run_sweep`` (``run_local``, the
dask driver, one locked shard per run, a chunk id per finished chunk): a run is resumable, a
resumed run samples only what is not yet precise, and nothing is counted twice.

Entry points are import-safe (sinter starts workers with ``spawn``).
"""

from __future__ import annotations

import contextlib
import dataclasses
import math
import time
from collections.abc import Sequence
from typing import Any

import numpy as np
import sinter
from rich.console import Console

from planner.config import Target
from planner.errors import InputError
from planner.manifest import Manifest, prepare_out_dir, read_manifest, resolved_task
from planner.precision_alloc import Allocation, allocate
from planner.precision_answers import (DEFAULT_FOCUS, AnswerPrecision, Assessment, assess,
                                       check_focus, describe, task_label)
from planner.sampling import (WorkItem, _sampling_lock, check_workers, default_workers, out_dir_of,
                              run_local, target_bytes_of)
from planner.store import SampleStore
from planner.sweep import StoppingRule

#: errors every task gets in the first pass (about +-45% on its rate at 95%)
MIN_ERRORS = 20
#: default cap on the sampling CPU time one task may take in total
MAX_CPU_SECONDS_PER_TASK = 3600.0
#: prior cost per shot before a task is measured, seconds per detector (measured here with
#: stim 1.16 + pymatching 2.4 on the demo circuits: 0.2-0.4 us/shot at 24 detectors, 4-8 us at
#: 336; only orders the first pass and sizes its caps)
PRIOR_SECONDS_PER_DETECTOR = 1.5e-8
#: fraction of a planned round that is sampled when the plan is far larger than what has been
#: spent (the rates behind the plan are still rough); later rounds run their plan in full
CAUTIOUS_FRACTION = 0.6
MAX_ROUNDS = 12
#: errors_left for a shots-limited round (the shot count is the limit)
NO_ERROR_LIMIT = 2**62


@dataclasses.dataclass(frozen=True)
class TargetedSummary:
    """What one ``run_targeted`` call did and where the answers stand.

    ``capped``: labels of tasks stopped by the CPU or budget cap while an answer still wanted
    them (the fits use what they have). ``cpu_seconds``: sampling seconds of the new chunks.
    """

    precision: float
    met: bool
    rounds: int
    new_shots: int
    new_errors: int
    new_chunks: int
    cpu_seconds: float
    wall_seconds: float
    answers: tuple[AnswerPrecision, ...]
    capped: tuple[str, ...]
    notes: tuple[str, ...]
    totals: tuple[sinter.TaskStats, ...]

    def to_json(self) -> dict[str, Any]:
        return {"precision": self.precision, "met": self.met, "rounds": self.rounds,
                "new_shots": self.new_shots, "new_errors": self.new_errors,
                "new_chunks": self.new_chunks, "cpu_seconds": self.cpu_seconds,
                "wall_seconds": self.wall_seconds, "answers": [a.to_json() for a in self.answers],
                "capped_tasks": list(self.capped), "notes": list(self.notes)}


def prior_cost_per_shot(task: sinter.Task) -> float:
    """CPU seconds per shot guessed from the circuit size (before any measurement)."""
    return PRIOR_SECONDS_PER_DETECTOR * max(task.circuit.num_detectors, 1)


def cost_per_shot(stats: sinter.TaskStats | None, prior: float) -> float:
    """Measured seconds per shot once a task has some, else ``prior``.

    >>> cost_per_shot(sinter.TaskStats(strong_id="a", decoder="d", json_metadata=None, shots=1000, seconds=0.5), 1.0)
    0.0005
    """
    if stats is None or stats.shots <= 0 or stats.seconds <= 0:
        return prior
    return stats.seconds / stats.shots


def shot_caps(*, stats: Sequence[sinter.TaskStats | None], costs: Sequence[float],
              max_cpu_seconds_per_task: float, budget_cap: StoppingRule | None) -> np.ndarray:
    """Most shots each task may reach: its CPU cap at its cost, the budget's shot cap, and the
    budget's error cap at its measured rate.

    >>> shot_caps(stats=[None], costs=[1e-3], max_cpu_seconds_per_task=10.0, budget_cap=None).tolist()
    [10000.0]
    """
    caps = np.array([max_cpu_seconds_per_task / c for c in costs], float)
    if budget_cap is not None:
        caps = np.minimum(caps, budget_cap.max_shots)
        for t, s in enumerate(stats):
            if s is not None and s.errors > 0:
                caps[t] = min(caps[t], budget_cap.max_errors * s.shots / s.errors)
    have = np.array([s.shots if s is not None else 0 for s in stats], float)
    return np.maximum(np.floor(caps), have)


class _Engine:
    """One sampling engine for the whole run: local sinter, or one dask connection.

    A scheduler address is reached on entering (before the out directory is written); a local
    dask cluster is started on the first round that samples.
    """

    def __init__(self, *, workers: int | None, cluster: str | None, console: Console) -> None:
        from planner.cluster import parse_cluster

        self.workers = workers or default_workers()
        self.spec = parse_cluster(cluster) if cluster is not None else None
        self.console = console
        self._stack = contextlib.ExitStack()
        self._client: Any = None

    def _connect(self) -> Any:
        if self._client is None and self.spec is not None:
            from planner.cluster import connect

            self._client = self._stack.enter_context(connect(self.spec, self.console))
        return self._client

    def __enter__(self) -> _Engine:
        if self.spec is not None and self.spec.address is not None:
            self._connect()
        return self

    def __exit__(self, *exc: Any) -> None:
        self._stack.__exit__(*exc)

    def run(self, items: Sequence[WorkItem], sink: Any) -> None:
        if not items:
            return
        if self.spec is not None:
            from planner.cluster import drive_chunks

            drive_chunks(self._connect(), items, sink, console=self.console)
        else:
            run_local(items, workers=self.workers, sink=sink)


def _validate(precision: float, workers: int | None, max_cpu: float, min_errors: int) -> None:
    if not (isinstance(precision, int | float) and 0 < precision < 1):
        raise InputError(f"--precision: {precision!r} is not allowed: a relative half-width "
                         "0 < REL < 1 (e.g. 0.05 for +-5%)")
    check_workers(workers)
    if not max_cpu > 0:
        raise InputError(f"max CPU seconds per task must be > 0, got {max_cpu!r}")
    if min_errors < 1:
        raise ValueError("min_errors must be >= 1")


def run_targeted(tasks: Sequence[sinter.Task], *, store: SampleStore, target: Target,
                 precision: float, workers: int | None = None, cluster: str | None = None,
                 console: Console | None = None,
                 max_cpu_seconds_per_task: float = MAX_CPU_SECONDS_PER_TASK,
                 budget_cap: StoppingRule | None = None, focus: Sequence[str] = DEFAULT_FOCUS,
                 min_errors: int = MIN_ERRORS, max_rounds: int = MAX_ROUNDS,
                 write_manifest: bool = True) -> TargetedSummary:
    """Sample ``tasks`` in rounds until every tracked answer has a relative 95% half-width of at
    most ``precision`` (or the caps stop the tasks that would still help).

    ``max_cpu_seconds_per_task``: sampling seconds one task may take in total (store included);
    ``budget_cap``: optional per-task shot / error caps on top. ``focus``: which answers to
    track (see :mod:`planner.precision_answers`). Progress goes to ``console`` (stderr).
    ``write_manifest``: prepare the out directory (manifest + target copy) as ``run_sweep`` does.
    """
    console = console if console is not None else Console(stderr=True)
    _validate(precision, workers, max_cpu_seconds_per_task, min_errors)
    focus = check_focus(focus)
    t0 = time.monotonic()
    resolved = [resolved_task(t) for t in tasks]
    ids = [t.strong_id() for t in resolved]
    if len(set(ids)) != len(ids):
        raise ValueError("two tasks have the same strong id (identical circuit, decoder and metadata)")
    engine = _Engine(workers=workers, cluster=cluster, console=console)
    with _sampling_lock(out_dir_of(store), shared=False) as stack:
        stack.enter_context(engine)  # a scheduler address is reached before the manifest
        if write_manifest:
            manifest = Manifest.for_sweep(
                target_sha256=target.sha256, target_name=target.name, tasks=resolved,
                sample_sha256=target.sampling_sha256, budget=f"precision {precision:g}",
                max_errors=budget_cap.max_errors if budget_cap else None,
                max_shots=budget_cap.max_shots if budget_cap else None)
            prepare_out_dir(out_dir_of(store), target_bytes=target_bytes_of(target), manifest=manifest)
        priors = [prior_cost_per_shot(t) for t in resolved]
        store.repair()
        counts = {"shots": 0, "errors": 0, "chunks": 0, "seconds": 0.0}
        rounds = 0
        assessment: Assessment | None = None
        capped: set[str] = set()
        notes: list[str] = []
        with store.writer() as writer:

            def sink(stats: sinter.TaskStats, chunk_id: str | None) -> None:
                writer.append(stats, chunk_id=chunk_id)
                counts["shots"] += stats.shots
                counts["errors"] += stats.errors
                counts["chunks"] += 1
                counts["seconds"] += stats.seconds

            planned_rounds = first_passes = 0
            stale = True  # samples were added since the last assessment
            while rounds < max_rounds:
                have = store.stats_by_id()
                cur = [have.get(sid) for sid in ids]
                costs = [cost_per_shot(s, p) for s, p in zip(cur, priors)]
                caps = shot_caps(stats=cur, costs=costs, max_cpu_seconds_per_task=max_cpu_seconds_per_task,
                                 budget_cap=budget_cap)
                # first pass: every task to min_errors (or its cap)
                first = []
                for t, (task, sid, s) in enumerate(zip(resolved, ids, cur)):
                    shots, errors = (s.shots, s.errors) if s else (0, 0)
                    if errors < min_errors and shots < caps[t]:
                        first.append(WorkItem(task=task, strong_id=sid, shots_left=int(caps[t] - shots),
                                              errors_left=min_errors - errors))
                if first and first_passes < 2:  # a second pass covers tasks whose prior cost was off
                    rounds += 1
                    first_passes += 1
                    stale = True
                    first.sort(key=lambda it: -it.size)
                    console.print(f"round {rounds}: first pass, {len(first)} of {len(ids)} tasks to "
                                  f"{min_errors} errors each (or their cap)")
                    engine.run(first, sink)
                    continue
                stats_now = [s for s in cur if s is not None and s.shots > 0]
                assessment = assess(stats_now, target, precision=precision, focus=focus)
                stale = False
                _print_assessment(console, assessment, rounds)
                if assessment.met or not assessment.answers:
                    break
                index = {sid: t for t, sid in enumerate(ids)}
                cols = [index[sid] for sid in assessment.task_ids]
                alloc = allocate(shots=[cur[t].shots for t in cols],
                                 rates=[max(cur[t].errors, 0.5) / cur[t].shots for t in cols],
                                 cost_per_shot=[costs[t] for t in cols],
                                 sensitivity=assessment.sensitivity,
                                 target_variance=assessment.target_variance(),
                                 max_shots=[caps[t] for t in cols], min_errors=min_errors)
                capped |= {task_label(resolved[cols[j]].json_metadata) for j in alloc.capped}
                if alloc.total_shots == 0:
                    notes.append("stopped: the tasks that would still help are at their cap "
                                 f"({', '.join(sorted(capped)) or 'none'})")
                    console.print(f"[yellow]{notes[-1]}[/]")
                    break
                spent = sum(s.seconds for s in stats_now)
                fraction = CAUTIOUS_FRACTION if planned_rounds == 0 and alloc.cpu_seconds > 2 * spent else 1.0
                items = [WorkItem(task=resolved[cols[j]], strong_id=ids[cols[j]],
                                  shots_left=max(1, math.ceil(fraction * x)), errors_left=NO_ERROR_LIMIT)
                         for j, x in enumerate(alloc.extra_shots) if x > 0]
                items.sort(key=lambda it: -it.size)
                rounds += 1
                planned_rounds += 1
                console.print(f"round {rounds}: {sum(it.shots_left for it in items):,} shots on "
                              f"{len(items)} tasks, about {fraction * alloc.cpu_seconds:.1f} CPU-s"
                              + ("" if alloc.met else f"; {len(alloc.unmet)} answer(s) cannot reach "
                                 "the target within the caps"))
                engine.run(items, sink)
                stale = True
            else:
                notes.append(f"stopped after {max_rounds} rounds")
    after = store.stats_by_id()
    final = [after[sid] for sid in ids if sid in after and after[sid].shots > 0]
    if stale and final:
        assessment = assess(final, target, precision=precision, focus=focus)
        _print_assessment(console, assessment, rounds, final=True)
    answers = assessment.answers if assessment else ()
    met = bool(assessment and assessment.answers and assessment.met)
    if assessment is not None:
        notes += list(assessment.notes)
    wall = time.monotonic() - t0
    console.print(f"targeted sweep: {counts['shots']:,} new shots ({counts['errors']:,} errors), "
                  f"{counts['seconds']:.1f} CPU-s sampling, {wall:.1f} s wall; "
                  + ("every tracked answer meets" if met else "NOT every answer meets")
                  + f" +-{100 * precision:g}%")
    return TargetedSummary(precision=precision, met=met, rounds=rounds, new_shots=counts["shots"],
                           new_errors=counts["errors"], new_chunks=counts["chunks"],
                           cpu_seconds=counts["seconds"], wall_seconds=wall, answers=answers,
                           capped=tuple(sorted(capped)), notes=tuple(dict.fromkeys(notes)),
                           totals=tuple(final))


def _print_assessment(console: Console, a: Assessment, rounds: int, *, final: bool = False) -> None:
    worst = a.worst
    if worst is None:
        console.print(f"after round {rounds}: nothing to track yet ({'; '.join(a.notes)})")
        return
    met = sum(x.met for x in a.answers)
    colour = "green" if a.met else "yellow"
    when = "final" if final else (f"after round {rounds}" if rounds else "store as it is")
    console.print(f"{when}: worst relative width "
                  f"[{colour}]{100 * worst.relative_width:.1f}%[/] vs target "
                  f"{100 * worst.target:g}% ({worst.name}); {met}/{len(a.answers)} answers met")


# ---------------------------------------------------------------------------------------------
# status


@dataclasses.dataclass(frozen=True)
class TaskPrecision:
    """One task against a precision target (for ``planner status``).

    ``relative_width``: relative 95% half-width of the task's shot error rate now;
    ``planned_relative_width``: what the plan brings it to; ``extra_shots`` and
    ``cpu_seconds_to_target``: the plan's shots and their cost at the measured cost per shot;
    ``state``: "precise" (needs nothing more), "sample" (the plan adds shots), "capped" (the cap
    stops it while an answer still wants it), "no data" (no shots yet: not estimable).
    """

    json_metadata: Any
    strong_id: str
    shots: int
    errors: int
    relative_width: float | None
    planned_relative_width: float | None
    extra_shots: int | None
    cpu_seconds_to_target: float | None
    state: str

    def to_json(self) -> dict[str, Any]:
        return dataclasses.asdict(self)


def _rate_rel_width(shots: int, errors: int) -> float | None:
    if shots <= 0 or errors <= 0:
        return None
    from planner.fits import LIKELIHOOD_FACTOR

    fit = sinter.fit_binomial(num_shots=shots, num_hits=errors, max_likelihood_factor=LIKELIHOOD_FACTOR)
    return (fit.high - fit.low) / (2 * fit.best)


def status_precision(store: SampleStore, target: Target, precision: float, *,
                     focus: Sequence[str] = DEFAULT_FOCUS, min_errors: int = MIN_ERRORS,
                     max_cpu_seconds_per_task: float = MAX_CPU_SECONDS_PER_TASK,
                     budget_cap: StoppingRule | None = None) -> list[TaskPrecision]:
    """Per task: its interval width now, what the allocation plan would give it to reach
    ``precision`` on the tracked answers, and the estimated CPU time of that plan (no sampling)."""
    _validate(precision, None, max_cpu_seconds_per_task, min_errors)
    have = store.stats_by_id()
    manifest = read_manifest(out_dir_of(store))
    order = list(have)
    if manifest is not None:
        order = [e.strong_id for e in manifest.tasks] + [s for s in have if s not in manifest.strong_ids]
    meta = {e.strong_id: e.json_metadata for e in manifest.tasks} if manifest else {}
    sampled = [have[s] for s in order if s in have and have[s].shots > 0]
    plan: dict[str, int] = {}
    capped: set[str] = set()
    if sampled:
        a = assess(sampled, target, precision=precision, focus=focus)
        if a.answers and not a.met:
            by_id = {s.strong_id: s for s in sampled}
            st = [by_id[sid] for sid in a.task_ids]
            costs = [cost_per_shot(s, 1e-6) for s in st]
            caps = shot_caps(stats=st, costs=costs, max_cpu_seconds_per_task=max_cpu_seconds_per_task,
                             budget_cap=budget_cap)
            alloc: Allocation = allocate(
                shots=[s.shots for s in st], rates=[max(s.errors, 0.5) / s.shots for s in st],
                cost_per_shot=costs, sensitivity=a.sensitivity, target_variance=a.target_variance(),
                max_shots=caps, min_errors=min_errors)
            plan = {sid: x for sid, x in zip(a.task_ids, alloc.extra_shots)}
            capped = {a.task_ids[j] for j in alloc.capped}
        else:
            plan = {s.strong_id: 0 for s in sampled}
    rows = []
    for sid in order:
        s = have.get(sid)
        shots, errors = (s.shots, s.errors) if s else (0, 0)
        if shots <= 0:
            rows.append(TaskPrecision(meta.get(sid), sid, 0, 0, None, None, None, None, "no data"))
            continue
        extra = plan.get(sid, 0)
        cost = s.seconds / s.shots if s.seconds > 0 else None
        rate = max(errors, 0.5) / shots
        planned = _rate_rel_width(shots + extra, max(1, round(errors + extra * rate)))
        state = "capped" if sid in capped else ("sample" if extra > 0 else "precise")
        rows.append(TaskPrecision(s.json_metadata, sid, shots, errors, _rate_rel_width(shots, errors),
                                  planned, extra, extra * cost if cost is not None else None, state))
    return rows


__all__ = ["MIN_ERRORS", "TargetedSummary", "TaskPrecision", "describe", "run_targeted",
           "status_precision"]
