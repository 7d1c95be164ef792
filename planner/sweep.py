"""Expanding a target's grid (distances x round counts x bases x scale points) into sinter tasks.

Each distance is sampled at every round count of ``sweep.round_counts(d)`` (r = d and r = 3d by
default): the per-cycle rate comes from the fidelity decay between them
(:mod:`planner.fits.decay`). The round count is part of the metadata, so tasks differing only in
it have different strong ids.

Scale points form one joint axis (every component times s) and one axis per component (that
component times s, the others at 1). The joint point at s = 1 is today's device; component axes
never repeat it. Every task carries the same JSON-native metadata key set::

    {"code", "d", "basis", "rounds", "axis", "factor", "scales"}

This module plans; it runs nothing.

>>> ScalePoint(axis="gate_2q", factor=0.5).scales()["gate_2q"], ScalePoint(axis="joint", factor=0.5).scales()["reset"]
(0.5, 0.5)
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from typing import Any

import sinter
import stim

from planner.circuits import build_memory_circuit
from planner.config import COMPONENTS, Target
from planner.errors import InputError
from planner.noise import NoiseModel, leakage_parameters

METADATA_KEYS: tuple[str, ...] = ("code", "d", "basis", "rounds", "axis", "factor", "scales")
JOINT = "joint"


@dataclasses.dataclass(frozen=True)
class StoppingRule:
    """Sample a task until it has ``max_errors`` logical errors or ``max_shots`` shots."""

    max_errors: int
    max_shots: int


#: Budget presets. ``quick`` is the demo (a few minutes on 2 cores); ``standard`` suits a
#: workstation over lunch; ``overnight`` a cluster. Errors set the relative interval width
#: (about 2/sqrt(errors) at 95%); shots cap the cost of points far below threshold.
BUDGETS: dict[str, StoppingRule] = {
    "quick": StoppingRule(max_errors=1_000, max_shots=1_000_000),
    "standard": StoppingRule(max_errors=10_000, max_shots=100_000_000),
    "overnight": StoppingRule(max_errors=100_000, max_shots=10_000_000_000),
}


@dataclasses.dataclass(frozen=True)
class ScalePoint:
    """One point of the noise grid: ``axis`` is "joint" or a component name."""

    axis: str
    factor: float

    def scales(self) -> dict[str, float]:
        if self.axis == JOINT:
            return {c: self.factor for c in COMPONENTS}
        if self.axis not in COMPONENTS:
            raise ValueError(f"unknown axis {self.axis!r}")
        return {c: (self.factor if c == self.axis else 1.0) for c in COMPONENTS}

    @property
    def label(self) -> str:
        return f"{self.axis}x{self.factor:g}"


@dataclasses.dataclass(frozen=True)
class SweepPlan:
    """A target's grid as sinter tasks (largest circuits first), the stopping rule of the budget,
    the scale points sampled and the budget's name."""

    tasks: tuple[sinter.Task, ...]
    rule: StoppingRule
    points: tuple[ScalePoint, ...]
    budget: str


def scale_points(target: Target) -> tuple[ScalePoint, ...]:
    """The joint axis (always including 1.0) then one axis per component."""
    joint = sorted(set(target.sweep.joint_scales) | {1.0})
    points = [ScalePoint(axis=JOINT, factor=float(s)) for s in joint]
    for comp in target.components:
        points += [ScalePoint(axis=comp, factor=float(s)) for s in target.sweep.component_scales
                   if s != 1.0]
    return tuple(points)


def rounds_for(target: Target, distance: int) -> int:
    """The smallest round count sampled at ``distance`` (r = d by default): the one ``planner
    circuit`` builds when no ``--rounds`` is given."""
    return round_counts_for(target, distance)[0]


def round_counts_for(target: Target, distance: int) -> tuple[int, ...]:
    """Every round count sampled at ``distance``, smallest first (``sweep.rounds`` alone: that one)."""
    return target.sweep.round_counts(distance)


def bases_for(target: Target) -> tuple[str, ...]:
    # stim's repetition-code memory exists in one basis only
    return ("z",) if target.sweep.code == "repetition" else tuple(target.sweep.bases)


def task_metadata(*, code: str, distance: int, basis: str, rounds: int, axis: str, factor: float,
                  scales: Mapping[str, float]) -> dict[str, Any]:
    return {"code": code, "d": distance, "basis": basis, "rounds": rounds, "axis": axis,
            "factor": float(factor), "scales": {c: float(scales.get(c, 1.0)) for c in COMPONENTS}}


def tasks_for_scales(target: Target, scales: Mapping[str, float], *, distances: Sequence[int],
                     label: str, factor: float = 1.0, rounds: Sequence[int] | None = None) -> list[sinter.Task]:
    """Tasks at one scale vector (all bases, the given distances, each at the target's round
    counts or at ``rounds``). ``label`` becomes the axis."""
    try:
        model = NoiseModel.from_target(target).with_scales(scales)
    except ValueError as exc:
        raise InputError(f"{target.source}: scales {dict(scales)} give an invalid noise model: {exc}") from None
    tasks = []
    for d in distances:
        for r in (round_counts_for(target, d) if rounds is None else rounds):
            for basis in bases_for(target):
                circuit = build_memory_circuit(model, code=target.sweep.code, distance=d, rounds=r, basis=basis)
                meta = task_metadata(code=target.sweep.code, distance=d, basis=basis, rounds=r,
                                     axis=label, factor=factor, scales=scales)
                tasks.append(sinter.Task(circuit=circuit, json_metadata=meta,
                                         **_leakage_task(target, meta, scales.get("leakage", 1.0))))
    return tasks


def _leakage_task(target: Target, meta: dict[str, Any], scale: float) -> dict[str, Any]:
    """The decoder of a task: ``<decoder>+leakage`` with the leakage parameters in ``meta`` (its
    strong id) when the target has a ``[device.leakage]`` section; without one, the plain decoder
    and no ``leakage`` scale in ``meta`` (tasks and strong ids as before the component existed)."""
    params = leakage_parameters(target, scale)
    if params is None:
        meta["scales"].pop("leakage", None)
        return {"decoder": target.sweep.decoder}
    meta["leakage"] = params
    return {"decoder": f"{target.sweep.decoder}+leakage"}


def check_scale_points(target: Target) -> None:
    """Raise :class:`InputError` naming ``sweep.joint_scales`` or ``sweep.component_scales`` if a
    scale point pushes a component past its meaningful range (fully mixing), with the largest
    factor that component allows. Builds no circuit."""
    today = NoiseModel.from_target(target)
    for point in scale_points(target):
        try:
            today.with_scales(point.scales())
        except ValueError as exc:
            key = "sweep.joint_scales" if point.axis == JOINT else "sweep.component_scales"
            axis = "every component" if point.axis == JOINT else point.axis
            most = _largest_valid_factor(today, point)
            raise InputError(f"{target.source}: {key}: {point.factor:g} (on {axis}) is not allowed: "
                             f"{exc}; factors up to {most:.4g} are allowed here") from None


def _largest_valid_factor(model: NoiseModel, point: ScalePoint) -> float:
    """Largest factor on ``point``'s axis that keeps the model valid (bisection; 0 always is)."""
    def ok(f: float) -> bool:
        try:
            model.with_scales(ScalePoint(axis=point.axis, factor=f).scales())
        except ValueError:
            return False
        return True

    low, high = 0.0, point.factor
    for _ in range(60):
        mid = (low + high) / 2
        low, high = (mid, high) if ok(mid) else (low, mid)
    return low


def budget_rule(name: str) -> StoppingRule:
    """The stopping rule of a named budget (InputError naming the allowed ones otherwise).

    >>> budget_rule("quick") is BUDGETS["quick"]
    True
    """
    if name not in BUDGETS:
        raise InputError(f"{name!r} is not a budget", field="budget", allowed=", ".join(BUDGETS))
    return BUDGETS[name]


def plan_sweep(target: Target, budget: str = "quick") -> SweepPlan:
    """Every task of the target's grid, largest circuits first, and the budget's stopping rule."""
    rule = budget_rule(budget)
    check_scale_points(target)
    points = scale_points(target)
    tasks: list[sinter.Task] = []
    for point in points:
        tasks += tasks_for_scales(target, point.scales(), distances=target.sweep.distances,
                                  label=point.axis, factor=point.factor)
    # largest circuits first: they are the slowest, so starting them early shortens the wall time
    tasks.sort(key=lambda t: -t.json_metadata["d"] * t.json_metadata["rounds"])
    return SweepPlan(tasks=tuple(tasks), rule=rule, points=points, budget=budget)


# ---------------------------------------------------------------------------------------------
# task identity and labels


def task_label(meta: Any, *, with_code: bool = False) -> str:
    """Short text naming a task: the scale axis times its factor, the distance, the basis and,
    when it is not the distance, the round count (the one form used by ``planner status``, the
    precision messages and the reports); ``with_code`` puts the code first. Metadata that is not
    a mapping is shown as it is.

    >>> task_label({"axis": "joint", "factor": 1.0, "d": 5, "basis": "x", "rounds": 5})
    'joint ×1 d=5 x'
    >>> task_label({"code": "surface", "axis": "gate_1q", "factor": 0.3, "d": 7, "basis": "z", "rounds": 21}, with_code=True)
    'surface gate_1q ×0.3 d=7 z r=21'
    """
    if not isinstance(meta, Mapping):
        return str(meta)
    factor = meta.get("factor", "?")
    if isinstance(factor, int | float) and not isinstance(factor, bool):
        factor = f"{float(factor) + 0.0:g}"
    label = f"{meta.get('axis', '?')} ×{factor} d={meta.get('d', '?')} {meta.get('basis', '?')}"
    if "rounds" in meta and meta.get("rounds") != meta.get("d"):
        label += f" r={meta['rounds']}"
    return f"{meta.get('code', '?')} {label}" if with_code else label


def detector_error_model_for(circuit: stim.Circuit) -> stim.DetectorErrorModel:
    """The detector error model sinter's workers derive from a circuit (decomposed if possible)."""
    try:
        return circuit.detector_error_model(decompose_errors=True, approximate_disjoint_errors=True)
    except ValueError:  # not graphlike: the decoder gets the undecomposed model, as in sinter
        try:
            return circuit.detector_error_model(approximate_disjoint_errors=True)
        except ValueError:
            return circuit.detector_error_model(approximate_disjoint_errors=True, flatten_loops=True)


def resolved_task(task: sinter.Task) -> sinter.Task:
    """The task with its detector error model filled in, so ``strong_id()`` works here.

    The model is computed the way sinter's workers compute it (decomposed where possible), so
    the strong id equals the one sinter itself would report for the same circuit.
    """
    if task.detector_error_model is not None:
        return task
    circuit = task.circuit if task.circuit is not None else stim.Circuit.from_file(task.circuit_path)
    dem = detector_error_model_for(circuit)
    return sinter.Task(circuit=circuit, decoder=task.decoder, detector_error_model=dem,
                       postselection_mask=task.postselection_mask,
                       postselected_observables_mask=task.postselected_observables_mask,
                       json_metadata=task.json_metadata, collection_options=task.collection_options)


def resolved_tasks(tasks: Sequence[sinter.Task]) -> tuple[list[sinter.Task], list[str]]:
    """The tasks resolved (see :func:`resolved_task`) and their strong ids; two tasks with the
    same strong id (identical circuit, decoder and metadata) are a ValueError."""
    resolved = [resolved_task(t) for t in tasks]
    ids = [t.strong_id() for t in resolved]
    if len(set(ids)) != len(ids):
        raise ValueError("two tasks have the same strong id (identical circuit, decoder and metadata)")
    return resolved, ids


# ---------------------------------------------------------------------------------------------
# reach: the joint axis sampled beyond the grid's distances when the goal lies far beyond them


def reach_distances(target: Target, *, goal_distance: int) -> tuple[int, ...]:
    """Distances sampled beyond ``sweep.distances`` on the joint axis (``sweep.reach_distances``).

    "auto": d_max + 2 and d_max + 4, none beyond the goal distance, and only when the goal lies
    more than one step (d_max + 2) beyond the grid: there the answers extrapolate Lambda over
    several steps, and the largest distances say best how it drifts. A list: those distances
    (the grid's own left out). ``[]``: none.

    >>> from planner.config import EXAMPLE_TOML, parse_target
    >>> example = parse_target(EXAMPLE_TOML.replace("[sweep]", "[sweep]\\nreach_distances = 'auto'"))
    >>> reach_distances(example, goal_distance=21), reach_distances(example, goal_distance=7)
    ((7, 9), ())
    >>> reach_distances(example, goal_distance=9)
    (7, 9)
    """
    grid = target.sweep.distances
    spec = target.sweep.reach_distances
    if spec != "auto":
        return tuple(d for d in spec if d not in grid)
    d_max = max(grid)
    if goal_distance <= d_max + 2:
        return ()
    return tuple(d for d in (d_max + 2, d_max + 4) if d <= goal_distance)


def reach_tasks(target: Target, *, goal_distance: int) -> list[sinter.Task]:
    """Tasks at :func:`reach_distances` on every joint scale point (today's device included).

    They carry the joint axis's own labels, so the fits put them on the same Lambda lines as the
    grid's distances and the precision-targeted driver weighs their shots like any other task's.
    Every joint point gets them: the joint-factor answer is read off the joint axis between its
    points, and which points it falls between is known only after sampling (a plan must be the
    same on every resume). Largest circuits first, as :func:`plan_sweep`.
    """
    distances = reach_distances(target, goal_distance=goal_distance)
    tasks: list[sinter.Task] = []
    if not distances:
        return tasks
    for point in scale_points(target):
        if point.axis == JOINT:
            tasks += tasks_for_scales(target, point.scales(), distances=distances, label=JOINT,
                                      factor=point.factor)
    tasks.sort(key=lambda t: -t.json_metadata["d"] * t.json_metadata["rounds"])
    return tasks


def tasks_at_rounds(target: Target, scales: Mapping[str, float], *, distance: int, rounds: Sequence[int],
                    label: str, factor: float = 1.0) -> list[sinter.Task]:
    """Tasks at one scale vector and distance, at each of ``rounds`` (every basis): the samples a
    per-cycle rate free of the time boundaries is fitted from (``planner verify`` takes r = d, 3d)."""
    return tasks_for_scales(target, scales, distances=(distance,), label=label, factor=factor, rounds=rounds)
