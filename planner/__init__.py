"""planner: error-budget planning for surface-code memory experiments.

The public Python API: everything a notebook or a script needs, in the order of the work.

- a target: :func:`load_target`, :func:`parse_target`, :class:`Target`; ``COMPONENTS`` (the
  error components, in order) and ``EXAMPLE_TOML`` (a small complete target);
- a circuit: :func:`build_circuit` (a target at one grid point), :func:`build_memory_circuit`
  (from a :class:`NoiseModel`);
- a sweep: :func:`plan_sweep`, then :func:`run_sweep` into a :class:`SampleStore` (run again to
  resume; it counts what the store holds) to a :class:`StoppingRule` (``BUDGETS`` maps
  quick/standard/overnight to theirs), or :func:`run_targeted` to a precision;
  :func:`load_out_dir` reads an out directory back, :func:`review` reads it and answers;
- fits: :func:`fit_stats` -> :class:`FitReport` (every figure an :class:`Interval` at
  ``CONFIDENCE``), :func:`fit_model` -> :class:`ResponseModel`;
- answers: :func:`answer_all` -> :class:`Answers` (all of the below at once, with bootstrap
  intervals), or one at a time: :func:`requirements`, :func:`cheapest_mix`, :func:`calculate`
  (from measured numbers, no samples), :func:`build_roadmap`, :func:`sensitivity`;
- checks: :func:`run_verification` samples the proposed operating points;
- qubits: :func:`qubit_layout` and :func:`layout_rows` (the coordinates per-qubit tables are
  keyed by, and each qubit's values in force); :func:`draw_instances` and :func:`run_spread`
  (device instances of a spread of qubits -> :class:`SpreadSummary`);
- two devices: :func:`compare_directories` (or :func:`compare_answers`) puts two out directories side by side;
- device data: :func:`read_events` (stim's result formats), :func:`count_events`,
  :func:`expectation` (exact, from a detector error model), :func:`fit_excess`, or the whole
  loop :func:`run_calibration` -> :class:`Calibration` (:func:`write_calibration` writes it);
  :func:`sample_events` invents measured data from a target;
- reports: :func:`write_all` (and :func:`write_fits`, :func:`write_requirements`,
  :func:`write_roadmap`, :func:`write_sensitivity`, :func:`write_verification`);
- leakage: :class:`Leakage` (the ``[device.leakage]`` section), :class:`LeakageSampler` (sinter's
  custom sampler for ``<decoder>+leakage`` tasks), :func:`population_curve` (rate equations),
  :func:`run_leakage_study`, :func:`removal_lever`;
- errors: :class:`InputError` (bad input, in domain terms: ``field`` and ``allowed``).

Names load on first use, so ``import planner`` is fast and imports neither stim nor dask.

>>> import planner
>>> target = planner.parse_target(planner.EXAMPLE_TOML)
>>> target.sweep.distances
(3, 5)
>>> planner.calculate(suppression=2.0, eps=1e-3, distance=5, eps_target=1e-6).distance
25
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

#: Where each public name lives (its module is imported on first use).
_HOME: dict[str, str] = {
    # target
    "COMPONENTS": "planner.config", "EXAMPLE_TOML": "planner.config", "Target": "planner.config",
    "load_target": "planner.config", "parse_target": "planner.config",
    "InputError": "planner.errors",
    # circuit
    "NoiseModel": "planner.noise", "build_memory_circuit": "planner.circuits",
    "build_circuit": "planner.target_circuit",
    "qubit_layout": "planner.circuits", "layout_rows": "planner.circuits",
    # sweep
    "BUDGETS": "planner.sweep", "StoppingRule": "planner.sweep", "SweepPlan": "planner.sweep",
    "plan_sweep": "planner.sweep",
    "reach_tasks": "planner.sweep", "plan_with_reach": "planner.jobs.sweep",
    "tasks_at_rounds": "planner.sweep",
    "SweepSummary": "planner.sampling", "run_sweep": "planner.sampling",
    "TargetedSummary": "planner.sampling", "run_targeted": "planner.jobs.sweep",
    "SampleStore": "planner.store",
    "OutDirSamples": "planner.jobs.review", "load_out_dir": "planner.jobs.review",
    # fits
    "CONFIDENCE": "planner.fits", "FitReport": "planner.fits", "Interval": "planner.fits",
    "fit_stats": "planner.fits",
    "DecayFit": "planner.fits", "fit_decay": "planner.fits",
    "ResponseModel": "planner.planning", "fit_model": "planner.planning",
    "ModelError": "planner.planning", "model_error": "planner.planning",
    # answers
    "Answers": "planner.planning", "answer_all": "planner.planning",
    "Requirements": "planner.planning", "requirements": "planner.planning",
    "MixAnswer": "planner.planning", "cheapest_mix": "planner.planning",
    "CalculatorAnswer": "planner.planning", "calculate": "planner.planning",
    "Roadmap": "planner.planning", "build_roadmap": "planner.planning",
    "Sensitivity": "planner.planning", "sensitivity": "planner.planning",
    "physical_qubits": "planner.planning",
    # checks
    "Verification": "planner.planning.verify", "run_verification": "planner.jobs.verify",
    "Comparison": "planner.planning.compare", "compare_answers": "planner.planning.compare",
    "compare_directories": "planner.jobs.compare",
    "OperatingPoint": "planner.planning.verify", "operating_points": "planner.planning.verify",
    "compare_predictions": "planner.planning.verify",
    "Review": "planner.jobs.review", "review": "planner.jobs.review",
    # spread of qubits
    "SpreadSummary": "planner.planning.spread", "draw_instances": "planner.planning.spread",
    "run_spread": "planner.jobs.spread",
    # device data
    "Events": "planner.devicedata", "read_events": "planner.devicedata", "write_events": "planner.devicedata",
    "count_events": "planner.devicedata", "expectation": "planner.devicedata", "fit_excess": "planner.devicedata",
    "ExcessFit": "planner.devicedata", "Calibration": "planner.jobs.calibrate",
    "run_calibration": "planner.jobs.calibrate", "sample_events": "planner.jobs.calibrate",
    "write_calibration": "planner.reports.calibrate",
    # reports
    "write_all": "planner.reports.files", "write_fits": "planner.reports.files",
    "write_requirements": "planner.reports.files", "write_roadmap": "planner.reports.files",
    "write_sensitivity": "planner.reports.files", "write_verification": "planner.reports.files",
    # leakage
    "Leakage": "planner.config.leakage", "LeakageSampler": "planner.sampling.leakage",
    "population_curve": "planner.planning.leakage", "run_leakage_study": "planner.jobs.leakage",
    "removal_lever": "planner.jobs.leakage_lever",
}

__all__ = [
    # target
    "COMPONENTS", "EXAMPLE_TOML", "InputError", "Target", "load_target", "parse_target",
    # circuit
    "NoiseModel", "build_circuit", "build_memory_circuit", "layout_rows", "qubit_layout",
    # sweep
    "BUDGETS", "OutDirSamples", "SampleStore", "StoppingRule", "SweepPlan", "SweepSummary",
    "TargetedSummary", "load_out_dir", "plan_sweep", "run_sweep", "run_targeted",
    "plan_with_reach", "reach_tasks", "tasks_at_rounds",
    # fits
    "CONFIDENCE", "FitReport", "Interval", "ResponseModel", "fit_model", "fit_stats",
    "ModelError", "model_error",
    "DecayFit", "fit_decay",
    # answers
    "Answers", "CalculatorAnswer", "MixAnswer", "Requirements", "Roadmap", "Sensitivity",
    "answer_all", "build_roadmap", "calculate", "cheapest_mix", "physical_qubits", "requirements",
    "sensitivity",
    # checks
    "Review", "Verification", "review", "run_verification",
    # spread of qubits
    "SpreadSummary", "draw_instances", "run_spread",
    "Comparison", "compare_answers", "compare_directories",
    # device data
    "Calibration", "Events", "ExcessFit", "count_events", "expectation", "fit_excess", "read_events",
    "run_calibration", "sample_events", "write_calibration", "write_events",
    "OperatingPoint", "compare_predictions", "operating_points",
    # reports
    "write_all", "write_fits", "write_requirements", "write_roadmap", "write_sensitivity",
    "write_verification",
    # leakage
    "Leakage", "LeakageSampler", "population_curve", "removal_lever", "run_leakage_study",
]


def __getattr__(name: str) -> Any:
    """Import a public name's module on first use (PEP 562), then keep the name here."""
    home = _HOME.get(name)
    if home is None:
        raise AttributeError(f"module 'planner' has no attribute {name!r}")
    value = getattr(importlib.import_module(home), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted({*globals(), *__all__})
