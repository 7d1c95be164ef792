"""The precision-targeted driver: spend CPU where the answers need it, stop when they are precise.

A uniform sweep gives every task the same number of errors. Here the sweep runs in rounds; each
round asks an *assessment* how precise the tracked answers are (planning's answer to "fit what
the store holds; how wide is each answer, and how does each task's shot count move it?"; passed
in as a callable, see :class:`Assess`), and lets the pure allocator
(:mod:`planner.sampling.allocate`) put the next shots where they shrink the unmet variances most
per CPU second. The first pass gives every task :data:`MIN_ERRORS` errors (or its cap), so every
task an answer depends on has data.

Sampling goes through the same set-up, engines and store as the uniform driver (one locked
shard per run, a chunk id per finished chunk): a run is resumable, a resumed run samples only
what is not yet precise, and nothing is counted twice.

Entry points are import-safe (sinter starts workers with ``spawn``).
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING, Any, Protocol

import numpy as np
import sinter
from rich.console import Console

from planner.errors import InputError
from planner.sampling.allocate import Allocation, allocate
from planner.sampling.engine import engine_for
from planner.sampling.setup import (
    ChunkCounts,
    SweepRecord,
    SweepSetup,
    recording_sink,
    sweep_setup,
)
from planner.sampling.work import WorkItem, check_workers
from planner.sweep import StoppingRule, task_label

if TYPE_CHECKING:
    from planner.config import Target
    from planner.store import SampleStore


class Answer(Protocol):
    """One tracked answer as the driver sees it."""

    name: str
    target: float

    @property
    def relative_width(self) -> float: ...

    @property
    def met(self) -> bool: ...

    def to_json(self) -> dict[str, Any]: ...


class Assessment(Protocol):
    """How precise the answers are now: the answers, the tasks they depend on (``task_ids``,
    the columns of ``sensitivity``), ``sensitivity`` (answers x tasks: ``V_a = sum_t S[a, t] /
    n_t``) and each answer's target variance."""

    answers: Sequence[Answer]
    task_ids: Sequence[str]
    sensitivity: Any
    notes: Sequence[str]

    @property
    def met(self) -> bool: ...

    @property
    def worst(self) -> Answer | None: ...

    def target_variance(self) -> Any: ...


#: fits what the stats hold and says how precise each tracked answer is (planning's ``assess``,
#: bound to the target, the precision and the answers to track)
Assess = Callable[[list[sinter.TaskStats]], Assessment]


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
    answers: tuple[Any, ...]
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


def check_precision_args(precision: float, workers: int | None, max_cpu: float, min_errors: int) -> None:
    """InputErrors naming the field for a precision outside (0, 1), a bad worker count or CPU cap.

    >>> check_precision_args(0.05, None, 10.0, 20)
    """
    if not (isinstance(precision, int | float) and 0 < precision < 1):
        raise InputError(f"{precision!r} is not allowed", field="precision",
                         allowed="a relative half-width 0 < REL < 1, e.g. --precision 0.05 for +-5%")
    check_workers(workers)
    if not max_cpu > 0:
        raise InputError(f"{max_cpu!r} is not allowed", field="max_cpu_seconds_per_task", allowed="> 0")
    if min_errors < 1:
        raise ValueError("min_errors must be >= 1")


def allocation_for(assessment: Assessment, stats: Sequence[sinter.TaskStats], *, costs: Sequence[float],
                   caps: Sequence[float], min_errors: int) -> Allocation:
    """The allocator's plan for the tasks of ``assessment`` (``stats``, ``costs`` and ``caps`` in
    the order of ``assessment.task_ids``); a task without errors counts half an error."""
    return allocate(shots=[s.shots for s in stats], rates=[max(s.errors, 0.5) / s.shots for s in stats],
                    cost_per_shot=costs, sensitivity=assessment.sensitivity,
                    target_variance=assessment.target_variance(), max_shots=caps, min_errors=min_errors)


@dataclasses.dataclass(frozen=True)
class TargetedLimits:
    """The caps and pacing of a targeted run (defaults: the module constants)."""

    max_cpu_seconds_per_task: float = MAX_CPU_SECONDS_PER_TASK
    budget_cap: StoppingRule | None = None
    min_errors: int = MIN_ERRORS
    max_rounds: int = MAX_ROUNDS


class _Rounds:
    """The state of one targeted run between rounds (what is stored, what is planned)."""

    def __init__(self, setup: SweepSetup, store: SampleStore, assess: Assess, limits: TargetedLimits,
                 console: Console) -> None:
        self.setup, self.store, self.assess, self.limits, self.console = setup, store, assess, limits, console
        self.priors = [prior_cost_per_shot(t) for t in setup.tasks]
        self.counts = ChunkCounts()
        self.rounds = self.first_passes = self.planned_rounds = 0
        self.assessment: Assessment | None = None
        self.capped: set[str] = set()
        self.notes: list[str] = []
        self.stale = True  # samples were added since the last assessment

    def snapshot(self) -> tuple[list[sinter.TaskStats | None], list[float], np.ndarray]:
        have = self.store.stats_by_id()
        cur = [have.get(sid) for sid in self.setup.ids]
        costs = [cost_per_shot(s, p) for s, p in zip(cur, self.priors)]
        caps = shot_caps(stats=cur, costs=costs, budget_cap=self.limits.budget_cap,
                         max_cpu_seconds_per_task=self.limits.max_cpu_seconds_per_task)
        return cur, costs, caps

    def first_pass(self, cur: Sequence[sinter.TaskStats | None], caps: np.ndarray) -> list[WorkItem]:
        """Every task below ``min_errors`` (and below its cap) up to ``min_errors``."""
        need = self.limits.min_errors
        items = []
        for t, (task, sid, s) in enumerate(zip(self.setup.tasks, self.setup.ids, cur)):
            shots, errors = (s.shots, s.errors) if s else (0, 0)
            if errors < need and shots < caps[t]:
                items.append(WorkItem(task=task, strong_id=sid, shots_left=int(caps[t] - shots),
                                      errors_left=need - errors))
        return sorted(items, key=lambda it: -it.size)

    def sample(self, items: Sequence[WorkItem], writer: Any) -> None:
        self.rounds += 1
        self.stale = True
        self.setup.engine.run(items, recording_sink(writer, self.counts))

    def plan(self, cur: Sequence[sinter.TaskStats | None], costs: Sequence[float],
             caps: np.ndarray) -> list[WorkItem] | None:
        """Assess the store and plan the next round (None: stop, met or capped)."""
        stats_now = [s for s in cur if s is not None and s.shots > 0]
        a = self.assessment = self.assess(stats_now)
        self.stale = False
        print_assessment(self.console, a, self.rounds)
        if a.met or not a.answers:
            return None
        index = {sid: t for t, sid in enumerate(self.setup.ids)}
        cols = [index[sid] for sid in a.task_ids]
        alloc = allocation_for(a, [cur[t] for t in cols], costs=[costs[t] for t in cols],  # type: ignore[misc]
                               caps=[caps[t] for t in cols], min_errors=self.limits.min_errors)
        if self._all_capped(alloc, cols):
            return None
        spent = sum(s.seconds for s in stats_now)
        return self._round_items(alloc, cols, cautious=self.planned_rounds == 0 and alloc.cpu_seconds > 2 * spent)

    def _all_capped(self, alloc: Allocation, cols: Sequence[int]) -> bool:
        """Note the tasks the caps stop; True (and say so) when the plan adds nothing."""
        self.capped |= {task_label(self.setup.tasks[cols[j]].json_metadata) for j in alloc.capped}
        if alloc.total_shots:
            return False
        self.notes.append("stopped: the tasks that would still help are at their cap "
                          f"({', '.join(sorted(self.capped)) or 'none'})")
        self.console.print(f"[yellow]{self.notes[-1]}[/]")
        return True

    def _round_items(self, alloc: Allocation, cols: Sequence[int], *, cautious: bool) -> list[WorkItem]:
        """The plan's shots as work items (a cautious first plan samples a fraction of them)."""
        fraction = CAUTIOUS_FRACTION if cautious else 1.0
        items = [WorkItem(task=self.setup.tasks[cols[j]], strong_id=self.setup.ids[cols[j]],
                          shots_left=max(1, math.ceil(fraction * x)), errors_left=NO_ERROR_LIMIT)
                 for j, x in enumerate(alloc.extra_shots) if x > 0]
        self.planned_rounds += 1
        unmet = "" if alloc.met else f"; {len(alloc.unmet)} answer(s) cannot reach the target within the caps"
        self.console.print(f"round {self.rounds + 1}: {sum(it.shots_left for it in items):,} shots on "
                           f"{len(items)} tasks, about {fraction * alloc.cpu_seconds:.1f} CPU-s{unmet}")
        return sorted(items, key=lambda it: -it.size)

    def run(self, writer: Any) -> None:
        while self.rounds < self.limits.max_rounds:
            cur, costs, caps = self.snapshot()
            first = self.first_pass(cur, caps)
            if first and self.first_passes < 2:  # a second pass covers tasks whose prior cost was off
                self.first_passes += 1
                self.console.print(f"round {self.rounds + 1}: first pass, {len(first)} of "
                                   f"{len(self.setup.ids)} tasks to {self.limits.min_errors} errors "
                                   "each (or their cap)")
                self.sample(first, writer)
                continue
            items = self.plan(cur, costs, caps)
            if items is None:
                return
            self.sample(items, writer)
        self.notes.append(f"stopped after {self.limits.max_rounds} rounds")


def run_targeted(tasks: Sequence[sinter.Task], *, store: SampleStore, target: Target | None,
                 precision: float, assess: Assess, workers: int | None = None,
                 cluster: str | None = None, console: Console | None = None,
                 limits: TargetedLimits = TargetedLimits(), write_manifest: bool = True) -> TargetedSummary:
    """Sample ``tasks`` in rounds until every answer ``assess`` tracks has a relative 95%
    half-width of at most ``precision`` (or the caps stop the tasks that would still help).

    ``assess``: see :data:`Assess` (the sweep job binds planning's to the target). ``limits``:
    CPU seconds one task may take in total (store included), optional per-task shot / error
    caps, the first pass's errors, the most rounds. ``write_manifest``: prepare the out
    directory (manifest + target copy) as the uniform driver does. Progress goes to ``console``.
    """
    console = console if console is not None else Console(stderr=True)
    check_precision_args(precision, workers, limits.max_cpu_seconds_per_task, limits.min_errors)
    t0 = time.monotonic()
    engine = engine_for(workers=workers, cluster=cluster, console=console)
    cap = limits.budget_cap
    record = SweepRecord(budget=f"precision {precision:g}", max_errors=cap.max_errors if cap else None,
                         max_shots=cap.max_shots if cap else None)
    with sweep_setup(tasks, store=store, engine=engine, target=target if write_manifest else None,
                     record=record) as setup:
        state = _Rounds(setup, store, assess, limits, console)
        with store.writer() as writer:
            state.run(writer)
    return _summary(state, precision=precision, wall=time.monotonic() - t0)


def _summary(state: _Rounds, *, precision: float, wall: float) -> TargetedSummary:
    after = state.store.stats_by_id()
    final = [after[sid] for sid in state.setup.ids if sid in after and after[sid].shots > 0]
    assessment = state.assessment
    if state.stale and final:
        assessment = state.assess(final)
        print_assessment(state.console, assessment, state.rounds, final=True)
    met = bool(assessment and assessment.answers and assessment.met)
    notes = state.notes + list(assessment.notes if assessment is not None else ())
    counts = state.counts
    state.console.print(f"targeted sweep: {counts.shots:,} new shots ({counts.errors:,} errors), "
                        f"{counts.seconds:.1f} CPU-s sampling, {wall:.1f} s wall; "
                        + ("every tracked answer meets" if met else "NOT every answer meets")
                        + f" +-{100 * precision:g}%")
    return TargetedSummary(precision=precision, met=met, rounds=state.rounds, new_shots=counts.shots,
                           new_errors=counts.errors, new_chunks=counts.chunks,
                           cpu_seconds=counts.seconds, wall_seconds=wall,
                           answers=tuple(assessment.answers) if assessment else (),
                           capped=tuple(sorted(state.capped)), notes=tuple(dict.fromkeys(notes)),
                           totals=tuple(final))


def print_assessment(console: Console, a: Assessment, rounds: int, *, final: bool = False) -> None:
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
