"""The status job: per task, its samples against the budget recorded in the out directory (and,
given a precision target, what the allocation plan would add), as one typed result with
``to_json()`` and one table.
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import sinter

from planner.config import Target, load_target
from planner.errors import InputError
from planner.fits import CONFIDENCE, LIKELIHOOD_FACTOR
from planner.planning.precision import DEFAULT_FOCUS, assess
from planner.sampling import MIN_ERRORS, remaining, shot_caps
from planner.sampling.targeted import (
    MAX_CPU_SECONDS_PER_TASK,
    allocation_for,
    check_precision_args,
    cost_per_shot,
)
from planner.store import TARGET_COPY, Manifest, SampleStore, read_manifest, require_out_dir
from planner.sweep import StoppingRule, task_label


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


def _rate_rel_width(shots: int, errors: int) -> float | None:
    if shots <= 0 or errors <= 0:
        return None
    fit = sinter.fit_binomial(num_shots=shots, num_hits=errors, max_likelihood_factor=LIKELIHOOD_FACTOR)
    return (fit.high - fit.low) / (2 * fit.best)


def _planned_shots(sampled: Sequence[sinter.TaskStats], target: Target, precision: float, *,
                   focus: Sequence[str], min_errors: int, max_cpu_seconds_per_task: float,
                   budget_cap: StoppingRule | None) -> tuple[dict[str, int], set[str]]:
    """Extra shots per strong id the allocation plan gives, and the ids it leaves capped."""
    if not sampled:
        return {}, set()
    a = assess(list(sampled), target, precision=precision, focus=focus)
    if not a.answers or a.met:
        return {s.strong_id: 0 for s in sampled}, set()
    by_id = {s.strong_id: s for s in sampled}
    st = [by_id[sid] for sid in a.task_ids]
    costs = [cost_per_shot(s, 1e-6) for s in st]
    caps = shot_caps(stats=st, costs=costs, max_cpu_seconds_per_task=max_cpu_seconds_per_task,
                     budget_cap=budget_cap)
    alloc = allocation_for(a, st, costs=costs, caps=caps, min_errors=min_errors)
    return dict(zip(a.task_ids, alloc.extra_shots)), {a.task_ids[j] for j in alloc.capped}


def _task_precision(sid: str, s: sinter.TaskStats | None, meta: Any, extra: int, capped: bool) -> TaskPrecision:
    if s is None or s.shots <= 0:
        return TaskPrecision(meta, sid, 0, 0, None, None, None, None, "no data")
    cost = s.seconds / s.shots if s.seconds > 0 else None
    rate = max(s.errors, 0.5) / s.shots
    planned = _rate_rel_width(s.shots + extra, max(1, round(s.errors + extra * rate)))
    state = "capped" if capped else ("sample" if extra > 0 else "precise")
    return TaskPrecision(s.json_metadata, sid, s.shots, s.errors, _rate_rel_width(s.shots, s.errors),
                         planned, extra, extra * cost if cost is not None else None, state)


def status_precision(store: SampleStore, target: Target, precision: float, *,
                     focus: Sequence[str] = DEFAULT_FOCUS, min_errors: int = MIN_ERRORS,
                     max_cpu_seconds_per_task: float = MAX_CPU_SECONDS_PER_TASK,
                     budget_cap: StoppingRule | None = None) -> list[TaskPrecision]:
    """Per task: its interval width now, what the allocation plan would give it to reach
    ``precision`` on the tracked answers, and the estimated CPU time of that plan (no sampling)."""
    check_precision_args(precision, None, max_cpu_seconds_per_task, min_errors)
    have = store.stats_by_id()
    manifest = read_manifest(store.out_dir)
    order = list(have)
    if manifest is not None:
        order = [e.strong_id for e in manifest.tasks] + [s for s in have if s not in manifest.strong_ids]
    meta = {e.strong_id: e.json_metadata for e in manifest.tasks} if manifest else {}
    sampled = [have[s] for s in order if s in have and have[s].shots > 0]
    plan, capped = _planned_shots(sampled, target, precision, focus=focus, min_errors=min_errors,
                                  max_cpu_seconds_per_task=max_cpu_seconds_per_task, budget_cap=budget_cap)
    return [_task_precision(sid, have.get(sid), meta.get(sid), plan.get(sid, 0), sid in capped)
            for sid in order]


# ---------------------------------------------------------------------------------------------
# the status of an out directory: one result, its JSON and its table


def duration(seconds: float | None) -> str:
    """Human-readable duration: '45 s', '12 min', '3.5 h', '2.1 d'.

    >>> duration(30), duration(600), duration(12600), duration(None)
    ('30 s', '10 min', '3.5 h', '?')
    """
    if seconds is None or not math.isfinite(seconds):
        return "?"
    if seconds < 90:
        return f"{seconds:.0f} s"
    if seconds < 5400:
        return f"{seconds / 60:.0f} min"
    if seconds < 172800:
        return f"{seconds / 3600:.1f} h"
    return f"{seconds / 86400:.1f} d"


def percent(x: float | None, digits: int) -> str:
    """A fraction as a percentage; '-' for missing or not finite (no errors yet: no width).

    >>> percent(0.1234, 1), percent(float("inf"), 0), percent(None, 0), percent(-1e-9, 1)
    ('12.3%', '-', '-', '0.0%')
    """
    if x is None or not math.isfinite(x):
        return "-"
    text = f"{x + 0.0:.{digits}%}"
    return text[1:] if text.startswith("-") and float(text[1:-1]) == 0 else text  # never "-0%"


def status_label(meta: Any) -> str:
    """A task as ``planner status`` names it: the code, then :func:`planner.sweep.task_label`.

    >>> status_label({"code": "surface", "d": 5, "basis": "z", "axis": "gate_1q", "factor": 0.3})
    'surface gate_1q ×0.3 d=5 z'
    """
    return task_label(meta, with_code=True)


def _sort_key(meta: Any) -> tuple:
    if not isinstance(meta, dict):
        return ("", 0.0, 0, "")

    def number(key: str) -> float:
        try:
            return float(meta.get(key, 0))
        except (TypeError, ValueError):
            return math.inf  # a hand-edited value sorts last instead of crashing the listing

    return (str(meta.get("axis", "")), number("factor"), number("d"), str(meta.get("basis", "")))


@dataclasses.dataclass(frozen=True)
class StatusTable:
    """A table as plain text cells: columns (name, justification), rows, and a closing line."""

    title: str
    caption: str
    columns: tuple[tuple[str, str], ...]
    rows: tuple[tuple[str, ...], ...]
    footer: str


@dataclasses.dataclass(frozen=True)
class StatusReport:
    """The status of one out directory: every task against the recorded budget and, given a
    ``precision`` target, against that (``targeted``: by strong id)."""

    directory: Path
    shards: tuple[Path, ...]
    budget: dict[str, Any] | None
    tasks: tuple[TaskStatus, ...]
    precision: float | None = None
    targeted: dict[str, TaskPrecision] = dataclasses.field(default_factory=dict)

    @property
    def cpu_seconds_left(self) -> float | None:
        known = [r.cpu_seconds_left for r in self.tasks if r.done is False]
        return None if any(c is None for c in known) else sum(c or 0.0 for c in known)

    def totals(self) -> dict[str, Any]:
        rows = self.tasks
        return {"tasks": len(rows), "done": sum(1 for r in rows if r.done),
                "shots": sum(r.shots for r in rows), "errors": sum(r.errors for r in rows),
                "cpu_seconds": sum(r.seconds for r in rows), "cpu_seconds_left": self.cpu_seconds_left}

    def _task_json(self, r: TaskStatus) -> dict[str, Any]:
        doc = {"strong_id": r.strong_id, "decoder": r.decoder, "metadata": r.json_metadata,
               "shots": r.shots, "errors": r.errors, "discards": r.discards, "cpu_seconds": r.seconds,
               "error_per_shot": {"best": r.rate_best, "low": r.rate_low, "high": r.rate_high},
               "relative_width": r.relative_width, "done": r.done, "shots_left": r.shots_left,
               "cpu_seconds_left": r.cpu_seconds_left}
        if r.strong_id in self.targeted:
            doc["precision"] = self.targeted[r.strong_id].to_json()
        return doc

    def to_json(self) -> dict[str, Any]:
        doc = {"dir": str(self.directory), "confidence": CONFIDENCE, "budget": self.budget,
               "shards": [str(p) for p in self.shards], "totals": self.totals(),
               "tasks": [self._task_json(r) for r in self.tasks]}
        if self.precision is not None:
            doc["precision"] = self.precision
        return doc

    def table(self) -> StatusTable:
        """The budget table, or (with a precision target) the precision table."""
        return self._precision_table() if self.precision is not None else self._budget_table()

    def _budget_table(self) -> StatusTable:
        totals = self.totals()
        title = f"{self.directory}: {totals['done']}/{totals['tasks']} tasks done"
        if self.budget is not None:
            title += (f" (budget '{self.budget['name']}': {self.budget['max_errors']} errors or "
                      f"{self.budget['max_shots']:,} shots per task)")
        rows = []
        for r in self.tasks:
            state = "?" if r.done is None else ("done" if r.done else f"~{r.shots_left:,} shots left")
            rows.append((status_label(r.json_metadata), f"{r.shots:,}", f"{r.errors:,}",
                         f"{r.rate_best:.2e}" if r.shots else "-", percent(r.relative_width, 0),
                         state, "-" if r.done else duration(r.cpu_seconds_left)))
        columns = (("task", "left"), ("shots", "right"), ("errors", "right"), ("error/shot", "right"),
                   ("width", "right"), ("state", "left"), ("CPU left", "right"))
        footer = (f"total: {totals['shots']:,} shots, {totals['errors']:,} errors, "
                  f"{duration(totals['cpu_seconds'])} CPU used, {duration(self.cpu_seconds_left)} CPU "
                  "left (divide by the number of cores)")
        return StatusTable(title=title, caption=f"width: relative width of the {CONFIDENCE:.0%} interval "
                           "of the logical error per shot; CPU time from measured seconds per shot",
                           columns=columns, rows=tuple(rows), footer=footer)

    def _precision_table(self) -> StatusTable:
        precision = self.precision or 0.0
        rows, cpu = [], 0.0
        for r in self.tasks:
            p = self.targeted.get(r.strong_id)
            if p is None:
                continue
            cpu += p.cpu_seconds_to_target or 0.0
            rows.append((status_label(r.json_metadata), f"{r.shots:,}", f"{r.errors:,}",
                         percent(p.relative_width, 1), percent(p.planned_relative_width, 1),
                         f"{p.extra_shots:,}" if p.extra_shots else "-",
                         duration(p.cpu_seconds_to_target) if p.extra_shots else "-", p.state))
        columns = tuple((c, "left" if c in ("task", "state") else "right")
                        for c in ("task", "shots", "errors", "width now", "planned", "extra shots", "CPU", "state"))
        footer = (f"to reach +-{precision:.0%}: about {duration(cpu)} of CPU (divide by the number of "
                  f"cores); run `planner sweep TARGET --out {self.directory} --precision {precision:g}`")
        return StatusTable(title=f"{self.directory}: tasks against a precision target of +-{precision:.0%}",
                           caption="width: relative 95% half-width of the task's error rate now, and "
                           "after the plan that brings the tracked answers to the target; CPU: "
                           "estimated core time of that plan", columns=columns, rows=tuple(rows),
                           footer=footer)


def status_job(directory: Path, *, precision: float | None = None) -> StatusReport:
    """The status of the out directory ``directory`` (InputError if it holds no samples)."""
    directory = require_out_dir(directory)
    store = SampleStore(directory)
    shards = store.shard_files()
    if not shards:
        raise InputError(f"{directory}: holds no samples ({store.samples_dir} has no .csv shards); "
                         "run 'planner sweep' first")
    manifest = read_manifest(directory)
    targeted: dict[str, TaskPrecision] = {}
    if precision is not None:
        target = load_target(directory / TARGET_COPY)
        targeted = {p.strong_id: p for p in status_precision(store, target, precision)}
    rows = sorted(store_status(store, manifest=manifest, likelihood_factor=LIKELIHOOD_FACTOR),
                  key=lambda r: _sort_key(r.json_metadata))
    budget = None
    if manifest is not None and manifest.max_errors is not None:
        budget = {"name": manifest.budget, "max_errors": manifest.max_errors,
                  "max_shots": manifest.max_shots}
    return StatusReport(directory=directory, shards=tuple(shards), budget=budget, tasks=tuple(rows),
                        precision=precision, targeted=targeted)
