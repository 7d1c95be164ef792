"""Planning: turning fits into requirements, roadmaps and sensitivities (never prints).

One computation for everyone: :func:`answer_all` gives the fits, the response model, the
requirements for the goal (with bootstrap intervals), the roadmap and the sensitivity.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import sinter

from planner.config import COMPONENTS, Target, load_target
from planner.errors import InputError
from planner.fits import CONFIDENCE, FitReport, fit_stats
from planner.planning.ask import (
    FactorAnswer,
    MixAnswer,
    Requirements,
    TodayAnswer,
    cheapest_mix,
    distance_extrapolation_note,
    requirements,
    smallest_distance,
)
from planner.planning.calculator import CalculatorAnswer, calculate
from planner.planning.model import (
    FitQuality,
    ResponseModel,
    fit_model,
    largest_distance_within,
    physical_qubits,
)
from planner.planning.roadmap import Roadmap, build_roadmap
from planner.planning.sensitivity import Sensitivity, sensitivity
from planner.planning.uncertainty import Uncertainty, bootstrap, with_intervals

__all__ = [
    "Answers", "CalculatorAnswer", "FactorAnswer", "FitQuality", "MixAnswer", "Requirements",
    "ResponseModel", "Roadmap", "Sensitivity", "TodayAnswer", "Uncertainty", "answer_all",
    "build_roadmap", "calculate", "cheapest_mix", "fit_model", "largest_distance_within",
    "OutDirSamples", "load_out_dir", "no_model_reason", "physical_qubits", "requirements", "sensitivity", "smallest_distance",
]


@dataclasses.dataclass(frozen=True)
class Answers:
    """Everything planned from one out directory. ``model`` and the answers built on it are None
    when no scale point has a Lambda (``notes`` says why)."""

    fits: FitReport
    model: ResponseModel | None
    requirements: Requirements | None
    roadmap: Roadmap | None
    sensitivity: Sensitivity | None
    uncertainty: Uncertainty | None
    notes: tuple[str, ...] = ()

    def to_json(self) -> dict[str, Any]:
        j = lambda x: x.to_json() if x is not None else None  # noqa: E731
        return {"confidence": CONFIDENCE, "fits": self.fits.to_json(), "model": j(self.model),
                "requirements": j(self.requirements), "roadmap": j(self.roadmap),
                "sensitivity": j(self.sensitivity), "uncertainty": j(self.uncertainty),
                "notes": list(self.notes)}


def no_model_reason(report: FitReport) -> str:
    if len(report.sampled_distances) < 2:
        return (f"only distance {report.sampled_distances[0]} sampled: no Lambda, so no model and no "
                "requirements (sample at least two distances)")
    return "no scale point has a Lambda: no model and no requirements"


def answer_all(target: Target, stats: Sequence[sinter.TaskStats], *, seed: int = 0, replicas: int = 200,
               eps_target: float | None = None, distance: int | None = None,
               qubits: int | None = None) -> Answers:
    """Fits, model, requirements, roadmap and sensitivity; with ``replicas > 0`` every figure
    derived from the model carries a bootstrap interval (``replicas=0``: best values only)."""
    report = fit_stats(stats)
    if not report.tasks:
        raise InputError("no samples with shots to fit")
    if not any(lf.suppression is not None for lf in report.lambdas):
        return Answers(report, None, None, None, None, None, (no_model_reason(report),))
    model = fit_model(report)
    req = requirements(model, target, eps_target=eps_target, distance=distance, qubits=qubits, report=report)
    unc = bootstrap(stats, report, model, req, replicas=replicas, seed=seed,
                    costs={c: target.cost(c) for c in COMPONENTS}) if replicas > 0 else None
    if unc is not None:
        req = with_intervals(req, unc)
    models = unc.models if unc else ()
    rm = build_roadmap(target, model, seed=seed, models=models, eps_target=eps_target)
    if rm is not None and (far := distance_extrapolation_note(rm.goal_distance, report.sampled_distances)):
        rm = dataclasses.replace(rm, note="; ".join(n for n in (rm.note, far) if n))
    return Answers(report, model, req, rm, sensitivity(model, target, models=models), unc)


@dataclasses.dataclass(frozen=True)
class OutDirSamples:
    """An out directory's target copy and summed samples (only the manifest's tasks).

    Unpacks as ``target, stats = load_out_dir(d)``. ``ignored_rows``: rows of tasks the manifest
    does not list (another target's samples copied in); ``damaged_rows``: rows torn by an
    interrupted write (set aside or skipped); ``notices``: what the store said about them.
    """

    target: Target
    stats: list[sinter.TaskStats]
    ignored_rows: int = 0
    damaged_rows: int = 0
    notices: tuple[str, ...] = ()

    def __iter__(self) -> Any:
        return iter((self.target, self.stats))


def load_out_dir(directory: str | Path, *, notify: Any = "stderr") -> OutDirSamples:
    """The target copy and the summed samples of an out directory (InputError if unusable).

    Only the tasks the manifest lists are read; damaged rows of idle shards are set aside
    first (see :mod:`planner.store`). ``notify``: called with each notice (default: one line
    on stderr; None: quiet, the notices are on the result).
    """
    from planner.store import MANIFEST
    from planner.store import SampleStore, print_notice

    root = Path(directory)
    if not root.is_dir():
        raise InputError(f"{root}: no such out directory (run `planner sweep` or `planner run` first)")
    tpath = root / "target.toml"
    if not tpath.is_file():
        raise InputError(f"{tpath}: missing: {root} is not a planner out directory")
    if not (root / MANIFEST).is_file():
        raise InputError(f"{root / MANIFEST}: missing: {root} is not a planner out directory "
                         f"(samples without planner's manifest cannot be fitted; run `planner sweep "
                         f"{tpath} --out {root}`)")
    target = load_target(tpath)
    store = SampleStore(root, notify=None)  # said below, once the answer is not an error
    try:
        store.repair()
    except InputError as exc:  # e.g. a full disk: reading still works, the rows are skipped
        store.note(f"could not repair the samples: {exc}")
    read = store.read()
    stats = [s for s in read.stats() if s.shots > 0]
    if not stats:
        other = f" ({read.ignored_rows} rows of other tasks ignored)" if read.ignored_rows else ""
        raise InputError(f"{root / 'samples'}: no samples yet{other} (run `planner sweep {tpath}` first)")
    say = print_notice if notify == "stderr" else notify
    for message in store.notices if say is not None else ():
        say(message)
    return OutDirSamples(target=target, stats=stats, ignored_rows=read.ignored_rows,
                         damaged_rows=read.damaged_rows, notices=tuple(store.notices))
