"""The leakage study of a target: the leaked population of data and measure qubits and the
detection probability against round, from experiments stopped at several depths; the rate-equation
solution beside them; and what leakage removal is worth against a better two-qubit gate (logical
error per cycle, sampled, at one distance). Combines config, circuits, the leakage sampler, fits and
the rate equations: a job.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from typing import Any

import numpy as np
import sinter

from planner.circuits import build_memory_circuit
from planner.config import Target
from planner.errors import InputError
from planner.fits.rates import CONFIDENCE, LIKELIHOOD_FACTOR, Interval, per_cycle_interval
from planner.noise import NoiseModel, leakage_parameters
from planner.planning.leakage import PopulationCurve, population_curve
from planner.sampling.leakage import CompiledLeakageSampler, LeakageTrace, leakage_samplers
from planner.sweep import resolved_task, tasks_for_scales

#: the variants compared at one distance: label -> (what it is, leakage section edits, scales)
VARIANTS: dict[str, tuple[str, dict[str, float], dict[str, float]]] = {
    "today": ("the device as configured", {}, {}),
    "reset_removal": ("multi-level reset: measure-qubit reset removes all leakage",
                      {"reset_removal": 1.0}, {}),
    "all_removal": ("multi-level reset and a data-qubit removal step each round",
                    {"reset_removal": 1.0, "data_removal": 1.0}, {}),
    "gate_2q_x0.7": ("a better two-qubit gate: 30% less Pauli error, leakage as today", {},
                     {"gate_2q": 0.7}),
    "no_leakage": ("no leakage at all (leakage x0)", {}, {"leakage": 0.0}),
}


def _interval(hits: int, n: int) -> Interval:
    fit = sinter.fit_binomial(num_shots=max(n, 1), num_hits=hits, max_likelihood_factor=LIKELIHOOD_FACTOR)
    return Interval(low=fit.low, best=fit.best, high=fit.high)


@dataclasses.dataclass(frozen=True)
class DepthTrace:
    """One experiment depth: per round, the leaked fraction of data and of measure qubits (end
    of the round) and the detection probability (per detector of that round; the last entry is
    the data readout's layer), each with an interval."""

    rounds: int
    shots: int
    data: tuple[Interval, ...]
    measure: tuple[Interval, ...]
    detection: tuple[Interval, ...]

    @classmethod
    def from_trace(cls, trace: LeakageTrace) -> DepthTrace:
        n_d, n_m, s = trace.num_data * trace.shots, trace.num_measure * trace.shots, trace.shots
        det = [(int(h), int(k) * s) for h, k in zip(trace.detections, trace.detectors_per_round) if k]
        return cls(rounds=trace.rounds, shots=s,
                   data=tuple(_interval(int(h), n_d) for h in trace.data_leaked),
                   measure=tuple(_interval(int(h), n_m) for h in trace.measure_leaked),
                   detection=tuple(_interval(h, n) for h, n in det))

    def to_json(self) -> dict[str, Any]:
        j = lambda xs: [x.to_json() for x in xs]  # noqa: E731
        return {"rounds": self.rounds, "shots": self.shots, "data_leaked": j(self.data),
                "measure_leaked": j(self.measure), "detection_probability": j(self.detection)}


@dataclasses.dataclass(frozen=True)
class VariantResult:
    label: str
    description: str
    shots: int
    errors: int
    per_cycle: Interval

    def to_json(self) -> dict[str, Any]:
        return {"label": self.label, "description": self.description, "shots": self.shots,
                "errors": self.errors, "logical_error_per_cycle": self.per_cycle.to_json()}


@dataclasses.dataclass(frozen=True)
class LeakageStudy:
    """Everything ``planner leakage`` shows (see the module doc)."""

    target: str
    distance: int
    rounds: int
    basis: str
    params: dict[str, Any]
    depths: tuple[DepthTrace, ...]
    pauli_detection: tuple[Interval, ...]
    rate: PopulationCurve
    variants: tuple[VariantResult, ...]

    def to_json(self) -> dict[str, Any]:
        return {"target": self.target, "distance": self.distance, "rounds": self.rounds,
                "basis": self.basis, "confidence": CONFIDENCE, "leakage": self.params,
                "depths": [d.to_json() for d in self.depths],
                "pauli_detection_probability": [x.to_json() for x in self.pauli_detection],
                "rate_equations": self.rate.to_json(),
                "variants": [v.to_json() for v in self.variants]}


def study_depths(rounds: int) -> tuple[int, ...]:
    """The depths at which the experiment is stopped: a quarter, a half and all of ``rounds``.

    >>> study_depths(20), study_depths(2)
    ((5, 10, 20), (1, 2))
    """
    return tuple(sorted({max(1, rounds // 4), max(1, rounds // 2), rounds}))


def _trace(circuit: Any, params: dict[str, Any], *, rounds: int, shots: int, seed: int | None) -> LeakageTrace:
    task = resolved_task(sinter.Task(circuit=circuit, decoder="pymatching+leakage",
                                     json_metadata={"leakage": params}))
    sampler = CompiledLeakageSampler(task, seed=seed)
    trace = sampler.new_trace(rounds)
    done = 0
    while done < shots:
        batch = min(4096, max(256, -(-(shots - done) // 256) * 256))
        sampler.simulate(batch, trace)
        done += batch
    return trace


def _variant_target(target: Target, edits: dict[str, float]) -> Target:
    leak = target.device.leakage
    assert leak is not None  # checked by the caller
    device = target.device.model_copy(update={"leakage": leak.model_copy(update=edits)})
    return target.model_copy(update={"device": device})


def _variants(target: Target, *, distance: int, rounds: int, basis: str, max_errors: int,
              max_shots: int, workers: int) -> tuple[VariantResult, ...]:
    tasks = []
    for label, (_, edits, scales) in VARIANTS.items():
        t = _variant_target(target, edits)
        t = t.model_copy(update={"sweep": t.sweep.model_copy(update={"rounds": rounds, "bases": (basis,)})})
        task = tasks_for_scales(t, scales, distances=[distance], label=label)[0]
        tasks.append(task)
    stats = sinter.collect(num_workers=workers, tasks=tasks, max_errors=max_errors, max_shots=max_shots,
                           custom_decoders=leakage_samplers())
    by_label = {s.json_metadata["axis"]: s for s in stats}
    out = []
    for label, (description, _, _) in VARIANTS.items():
        s = by_label[label]
        _, cyc = per_cycle_interval(shots=s.shots, errors=s.errors, rounds=rounds)
        out.append(VariantResult(label=label, description=description, shots=s.shots, errors=s.errors,
                                 per_cycle=cyc))
    return tuple(out)


def run_leakage_study(target: Target, *, distance: int, rounds: int, basis: str | None = None,
                      shots: int = 4096, max_errors: int = 200, max_shots: int = 200_000,
                      workers: int = 1, compare: bool = True, seed: int | None = None) -> LeakageStudy:
    """Sample the study (see the module doc). Needs a ``[device.leakage]`` section."""
    if target.device.leakage is None:
        raise InputError(f"{target.source}: device.leakage: missing section: this target has no "
                         "leakage to study (add [device.leakage], e.g. gate_2q = 5e-4)")
    if shots < 1:
        raise InputError(f"{shots} is not allowed", field="shots", allowed="an integer >= 1")
    b = basis or target.sweep.bases[0]
    model = NoiseModel.from_target(target)
    params = leakage_parameters(target)
    assert params is not None  # the section is there
    depths = []
    for r in study_depths(rounds):
        circuit = build_memory_circuit(model, code=target.sweep.code, distance=distance, rounds=r, basis=b)
        depths.append(DepthTrace.from_trace(_trace(circuit, params, rounds=r, shots=shots, seed=seed)))
    longest = build_memory_circuit(model, code=target.sweep.code, distance=distance, rounds=rounds, basis=b)
    quiet = {**params, "gate_2q": 0.0, "heating_per_us": 0.0}
    pauli = DepthTrace.from_trace(_trace(longest, quiet, rounds=rounds, shots=shots, seed=seed)).detection
    variants = _variants(target, distance=distance, rounds=rounds, basis=b, max_errors=max_errors,
                         max_shots=max_shots, workers=workers) if compare else ()
    return LeakageStudy(target=target.name, distance=distance, rounds=rounds, basis=b, params=params,
                        depths=tuple(depths), pauli_detection=pauli, rate=population_curve(longest, params),
                        variants=variants)


def steady_comparison(study: LeakageStudy, last: int = 3) -> dict[str, tuple[Interval, float]]:
    """Sampled population over the last ``last`` rounds of the longest depth (pooled) against
    the rate-equation steady state, for data and measure qubits."""
    deep = study.depths[-1]
    out = {}
    for name, series, steady in (("data", deep.data, study.rate.steady_data),
                                 ("measure", deep.measure, study.rate.steady_measure)):
        tail: Sequence[Interval] = series[-last:]
        out[name] = (Interval(best=float(np.mean([x.best for x in tail])),
                              low=float(np.mean([x.low for x in tail])),
                              high=float(np.mean([x.high for x in tail]))), steady)
    return out
