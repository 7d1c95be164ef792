"""The spread job: draw device instances, sample each at the target's distances (a small budget
each), and summarize the median and the worse tenth of chips (the drawing and the summary are
pure: :mod:`planner.planning.spread`).

Samples go to ``out_dir/samples`` as usual (resumable: the same target, seed and instance count
give the same circuits, so a second run tops up instead of starting again).
"""

from __future__ import annotations

import dataclasses
from pathlib import Path
from typing import Any

import sinter

from planner.circuits import build_memory_circuit, qubit_layout
from planner.config import Target
from planner.errors import InputError
from planner.fits import fit_stats
from planner.noise import NoiseModel
from planner.planning.spread import DRAWS, SpreadSummary, draw_instances, summarize_spread
from planner.sweep import StoppingRule, bases_for, rounds_for, task_metadata

__all__ = ["DEFAULT_INSTANCES", "SPREAD_RULE", "SpreadRun", "check_instances", "choose_draw", "run_spread", "spread_tasks"]

#: the scale axis of the model as the target lists it (sampled beside the instances)
LISTED = "as listed"
#: instances drawn by default: a laptop samples them in about a minute at d <= 7
DEFAULT_INSTANCES = 10
#: most instances one job may draw (each is a full set of circuits)
MAX_INSTANCES = 1000
#: per task: a relative 95% interval of about +-20% on each instance's rate, which is smaller
#: than the spread between chips it is meant to show
SPREAD_RULE = StoppingRule(max_errors=100, max_shots=200_000)


@dataclasses.dataclass(frozen=True)
class SpreadRun:
    summary: SpreadSummary
    out_dir: Path
    new_shots: int


def choose_draw(target: Target, draw: str | None) -> str:
    """``draw`` checked, or the default: ``spread`` when the target states ``[device.spread]``,
    else ``table`` when it has per-qubit or per-pair values; nothing to draw from is refused."""
    dev = target.device
    has_table = bool(dev.qubits or dev.pairs)
    has_spread = dev.spread is not None and any(dev.spread.sigmas().values())
    if draw is None:
        if has_spread or (dev.spread is not None and not has_table):
            return "spread"
        if has_table:
            return "table"
        raise InputError("nothing to draw instances from: state a spread per value ([device.spread], "
                         "e.g. gate_2q = 0.3) or give per-qubit values (device.qubits or device.qubit_table)",
                         source=target.source)
    if draw not in DRAWS:
        raise InputError(f"{draw!r} is not a way to draw instances", field="draw", allowed=", ".join(DRAWS))
    if draw == "table" and not has_table:
        raise InputError("--draw table needs per-qubit or per-pair values to resample (device.qubits, "
                         "device.qubit_table, device.pairs or device.pair_table)", source=target.source)
    if draw == "spread" and dev.spread is None:
        raise InputError("--draw spread needs a [device.spread] section (a log-normal sigma per value, "
                         "e.g. gate_2q = 0.3)", source=target.source)
    return draw


def check_instances(instances: object) -> int:
    """The number of instances, checked (1 to :data:`MAX_INSTANCES`)."""
    if isinstance(instances, bool) or not isinstance(instances, int) or not 1 <= instances <= MAX_INSTANCES:
        raise InputError(f"{instances!r} is not allowed", field="instances",
                         allowed=f"an integer from 1 to {MAX_INSTANCES}")
    return instances


def spread_tasks(target: Target, instances: list[NoiseModel]) -> tuple[list[sinter.Task], list[str]]:
    """The tasks of every model at the target's distances and bases, and their labels (each is
    its own scale axis, so the fits keep them apart): the first model is the target's as listed
    ("as listed"), the others the instances ("instance K")."""
    code = target.sweep.code
    labels = [LISTED, *(f"instance {k}" for k in range(1, len(instances)))]
    tasks = []
    for label, model in zip(labels, instances):
        for d in target.sweep.distances:
            r = rounds_for(target, d)
            for basis in bases_for(target):
                circuit = build_memory_circuit(model, code=code, distance=d, rounds=r, basis=basis)
                meta = task_metadata(code=code, distance=d, basis=basis, rounds=r, axis=label, factor=1.0,
                                     scales=dict(model.scales))
                tasks.append(sinter.Task(circuit=circuit, decoder=target.sweep.decoder, json_metadata=meta))
    tasks.sort(key=lambda t: -t.json_metadata["d"] * t.json_metadata["rounds"])
    return tasks, labels


def run_spread(target: Target, *, out_dir: Path, instances: int = DEFAULT_INSTANCES, draw: str | None = None,
               seed: int = 0, rule: StoppingRule = SPREAD_RULE, workers: int | None = None,
               console: Any = None) -> SpreadRun:
    """Draw ``instances`` chips, sample each at every distance of the target, summarize."""
    from planner.sampling import run_sweep
    from planner.store import SampleStore

    instances = check_instances(instances)
    how = choose_draw(target, draw)
    sigmas = target.device.spread.sigmas() if target.device.spread is not None else {}
    model = NoiseModel.from_target(target)
    layout = qubit_layout(code=target.sweep.code, distance=max(target.sweep.distances))
    if console is not None:
        console.print(f"drawing {instances} device instances ({how}) over the {len(layout.qubits)} qubits "
                      f"of the d={layout.distance} patch", soft_wrap=True, markup=False)
    chips = draw_instances(model, layout, draw=how, count=instances, seed=seed,
                           sigmas=sigmas if how == "spread" else None)
    tasks, labels = spread_tasks(target, [model, *chips])
    summary = run_sweep(tasks, store=SampleStore(out_dir), rule=rule, workers=workers, console=console)
    fits = fit_stats(list(summary.totals))
    result = summarize_spread(fits, labels=labels[1:], draw=how, seed=seed, listed=labels[0],
                              sigmas=sigmas if how == "spread" else {})
    return SpreadRun(summary=result, out_dir=Path(out_dir), new_shots=summary.new_shots)
