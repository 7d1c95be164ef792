"""The calibrate job: measured detection events -> statistics against the first-principles model
-> fitted excess per component (and bad qubits) -> calibrated target, staged comparison of the
logical error per cycle, outliers. Also :func:`sample_events`, the invented "experiment" that
``planner events`` writes (stim's own sampler and writer, planner's own circuits).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
import sinter
import stim

from planner.circuits import build_memory_circuit
from planner.config import Target
from planner.devicedata import (
    DEFAULT_COMPONENTS,
    DetectorLayout,
    ExcessFit,
    LogicalPoint,
    StabilizerRow,
    TargetKey,
    UnexpectedPair,
    calibrated_text,
    classify_pairs,
    count_events,
    dem_of,
    expectation,
    fit_excess,
    layout_of,
    log_sigma,
    measure,
    read_events,
    read_logical_csv,
    stabilizer_rows,
    target_key,
    unexpected_pairs,
    with_excess,
    with_qubit_noise,
)
from planner.devicedata.events import check_format
from planner.devicedata.fit import STEP
from planner.errors import InputError
from planner.fits import Interval
from planner.fits.rates import per_cycle_interval
from planner.noise import NoiseModel
from planner.sweep import StoppingRule, detector_error_model_for, resolved_tasks, task_metadata
from planner.target_circuit import build_circuit

__all__ = ["STAGE_RULE", "Calibration", "LogicalCheck", "Stage", "parse_qubit", "run_calibration",
           "sample_events"]

#: a measured logical point this many sigma from the calibrated model is flagged
LOGICAL_SIGMA = 3.0
#: stopping rule of each stage's logical error sample (small: a comparison, not a projection)
STAGE_RULE = StoppingRule(max_errors=300, max_shots=300_000)


def parse_qubit(text: str) -> tuple[float, float]:
    """``"3,3"`` -> (3.0, 3.0): a qubit's coordinates as planner's circuits place it.

    >>> parse_qubit(" 3, 5 ")
    (3.0, 5.0)
    """
    try:
        x, y = (float(v) for v in text.split(","))
    except ValueError:
        raise InputError(f"{text!r} is not a qubit's coordinates", field="inject", allowed="X,Y e.g. 3,3") from None
    return (x, y)


def _qubit_index(circuit: stim.Circuit, xy: tuple[float, float]) -> int:
    for q, c in layout_of(circuit, basis="z").qubits.items():
        if c == xy:
            return q
    raise InputError(f"no qubit at {xy[0]:g},{xy[1]:g} in this circuit (see `planner circuit` "
                     "for the QUBIT_COORDS)", field="inject")


def sample_events(target: Target, *, distance: int, rounds: int, basis: str, shots: int, out: Path,
                  fmt: str = "b8", seed: int | None = None,
                  inject: Sequence[tuple[tuple[float, float], float]] = ()) -> list[Path]:
    """Write ``shots`` shots of detection events (``out``) and observable flips (its sibling
    ``<stem>.obs<suffix>``) sampled from the target's circuit; ``inject``: (qubit, p) extra
    depolarizing on one qubit in every layer (a bad qubit the target file cannot state)."""
    from planner.devicedata import obs_path_for

    fmt = check_format(fmt)
    if shots < 1 or (fmt == "ptb64" and shots % 64):
        raise InputError(f"{shots} is not allowed", field="shots",
                         allowed="a multiple of 64 for ptb64" if fmt == "ptb64" else "an integer >= 1")
    circuit = build_circuit(target, distance=distance, basis=basis, rounds=rounds)
    for xy, p in inject:
        if not 0 <= p <= 0.5:
            raise InputError(f"{p:g} is not a probability", field="inject", allowed="0 to 0.5")
        circuit = with_qubit_noise(circuit, qubit=_qubit_index(circuit, xy), p=p)
    out = Path(out)
    if out.parent and not out.parent.exists():
        raise InputError(f"{out.parent}: no such directory", field="out")
    _check_events_size(circuit.num_detectors + circuit.num_observables, shots, fmt, out)
    sampler = circuit.compile_detector_sampler(seed=seed)
    obs = obs_path_for(out)
    sampler.sample_write(shots, filepath=str(out), format=fmt, obs_out_filepath=str(obs), obs_out_format=fmt)
    return [out, obs]


#: the largest event file `planner events` writes (a measured experiment is far smaller)
MAX_EVENT_BYTES = 64 * 2**30


def _check_events_size(bits_per_shot: int, shots: int, fmt: str, out: Path) -> None:
    """Refuse, before sampling, an event file larger than :data:`MAX_EVENT_BYTES` or than the free
    space where it goes (its size estimated from the format: one character per bit for ``01``,
    bit-packed otherwise; sparse formats are usually smaller)."""
    import shutil

    per_shot = bits_per_shot + 1 if fmt == "01" else (bits_per_shot + 7) // 8
    size = shots * max(per_shot, 1)
    free = shutil.disk_usage(out.parent if str(out.parent) else Path(".")).free
    if size > min(MAX_EVENT_BYTES, free):
        limit = "the free space there" if free < MAX_EVENT_BYTES else f"{MAX_EVENT_BYTES / 2**30:.0f} GiB"
        raise InputError(f"{shots:,} shots would write about {size / 2**30:,.1f} GiB to {out}; at most {limit}",
                         field="shots")


@dataclasses.dataclass(frozen=True)
class Stage:
    """One stage of the comparison: the components' excess switched on so far and the sampled
    logical error per cycle (None when not sampled)."""

    name: str
    excess: dict[str, float]
    eps: Interval | None
    shots: int = 0
    errors: int = 0


@dataclasses.dataclass(frozen=True)
class LogicalCheck:
    """A measured logical error per cycle against the calibrated model's, in sigma (log space)."""

    point: LogicalPoint
    measured: Interval
    model: Interval | None
    sigma: float | None


@dataclasses.dataclass(frozen=True)
class Calibration:
    """Everything ``planner calibrate`` found: the per-detector arrays [D] and pair matrices
    [D, D] for the data, the first-principles model and the calibrated one (probabilities;
    models exact), the pair ``classes`` (index into ``planner.devicedata.CLASSES``), the fit, the
    stabilizer rows, unexpected pairs, the measured and staged logical error per cycle, the
    logical checks and the calibrated target's text. ``to_json()`` is ``calibrate --json``."""

    target: Target
    distance: int
    rounds: int
    basis: str
    source: str
    num_shots: int
    layout: DetectorLayout
    classes: np.ndarray
    data_detection: np.ndarray
    model_detection: np.ndarray
    cal_detection: np.ndarray
    data_pairs: np.ndarray
    model_pairs: np.ndarray
    cal_pairs: np.ndarray
    fit: ExcessFit
    keys: dict[str, TargetKey]
    stabilizers: list[StabilizerRow]
    unexpected: list[UnexpectedPair]
    measured: Interval | None
    measured_counts: tuple[int, int] | None
    stages: list[Stage]
    logical: list[LogicalCheck]
    calibrated_toml: str
    threshold: float

    def components_json(self) -> dict[str, Any]:
        """component -> fitted excess in the target file's units, with the key it adds to."""
        out = {}
        for c in self.fit.components:
            k = self.keys[c.name]
            out[c.name] = {"best": c.best * k.factor, "low": c.low * k.factor, "high": c.high * k.factor,
                           "key": f"device.errors.{k.key}", "today": k.today,
                           "calibrated": k.today + c.best * k.factor}
        return out

    def outliers(self) -> list[dict[str, Any]]:
        """Qubits (from the per-qubit fit) and stabilizers (detection rate) beyond the threshold
        (``calibrate --json`` ``outliers``; measured logical points are in ``logical_checks``)."""
        out: list[dict[str, Any]] = [
            {"qubit": list(q.qubit), "kind": "qubit", "role": q.role, "sigma": q.sigma,
             "excess_depolarizing_per_layer": {"best": q.best, "low": q.low, "high": q.high},
             "excess_readout": dict(zip(("best", "low", "high"), q.readout)),
             "excess_gate_1q": dict(zip(("best", "low", "high"), q.gate_1q))}
            for q in self.fit.qubits]
        for s in sorted(self.stabilizers, key=lambda s: -abs(s.sigma)):
            if abs(s.sigma) >= self.threshold:
                out.append({"qubit": list(s.xy), "kind": "stabilizer", "role": "measure", "type": s.kind,
                            "sigma": s.sigma, "detection_data": s.data, "detection_model": s.model})
        return out

    def logical_outliers(self) -> list[LogicalCheck]:
        """Measured logical points :data:`LOGICAL_SIGMA` or more from the calibrated model."""
        return [c for c in self.logical if c.sigma is not None and abs(c.sigma) >= LOGICAL_SIGMA]

    def to_json(self) -> dict[str, Any]:
        return {
            "target": self.target.source, "events": self.source, "distance": self.distance,
            "rounds": self.rounds, "basis": self.basis, "shots": self.num_shots,
            "components": self.components_json(), "outliers": self.outliers(),
            "fit": {"reduced_chi2": self.fit.reduced_chi2, "quantities": self.fit.num_quantities,
                    "threshold_sigma": self.threshold},
            "unexpected_pairs": [{"detectors": [u.i, u.j], "p": u.p, "sigma": u.sigma,
                                  "stabilizers": [list(map(float, self.layout.xy[u.i])),
                                                  list(map(float, self.layout.xy[u.j]))]}
                                 for u in self.unexpected[:20]],
            "measured_logical_error_per_cycle": self.measured.to_json() if self.measured else None,
            "stages": [{"name": s.name, "excess": s.excess, "shots": s.shots, "errors": s.errors,
                        "logical_error_per_cycle": s.eps.to_json() if s.eps else None} for s in self.stages],
            "logical_checks": [{"label": c.point.label, "distance": c.point.distance, "rounds": c.point.rounds,
                                "measured": c.measured.to_json(),
                                "model": c.model.to_json() if c.model else None, "sigma": c.sigma,
                                "flagged": c in self.logical_outliers()}
                               for c in self.logical],
        }


def run_calibration(target: Target, *, events: Path, distance: int, rounds: int, basis: str,
                    fmt: str = "b8", obs: Path | None = None, components: Sequence[str] = DEFAULT_COMPONENTS,
                    threshold: float = 5.0, out_dir: Path | None = None, stage_rule: StoppingRule | None = STAGE_RULE,
                    logical_csv: Path | None = None, workers: int | None = None, console: Any = None) -> Calibration:
    """The whole loop on one file of measured events (see the module doc). ``stage_rule``
    None: no sampling (no stages, no logical predictions)."""
    from planner.devicedata.fit import check_components

    components = check_components(components)
    if not threshold > 0:
        raise InputError(f"{threshold:g} is not allowed", field="threshold", allowed="a number of sigma > 0, e.g. 5")
    circuit = build_circuit(target, distance=distance, basis=basis, rounds=rounds)
    keys = {c: target_key(target, c) for c in components}
    base = NoiseModel.from_target(target)
    code = target.sweep.code

    def build(m: NoiseModel) -> stim.Circuit:
        return build_memory_circuit(m, code=code, distance=distance, rounds=rounds, basis=basis)

    ev = read_events(events, num_detectors=circuit.num_detectors, fmt=fmt,
                     num_observables=circuit.num_observables, obs_path=obs)
    counts = count_events(ev)
    layout = layout_of(circuit, basis=basis)
    first = expectation(dem_of(circuit))
    union = expectation(dem_of(build(with_excess(base, {c: STEP for c in components})))).connected
    fit = fit_excess(measure(counts, union | first.connected), base, build, layout=layout,
                     components=components, threshold=threshold)
    note = (f"Calibrated by `planner calibrate` from {ev.source} ({ev.num_shots} shots, d={distance}, "
            f"{rounds} rounds, basis {basis}):\nthe target {target.source} with the fitted excess of "
            f"{', '.join(components)} added under [device.errors].")
    text = calibrated_text(Path(target.source).read_text(), target, fit.excess(), note=note)
    classes = classify_pairs(layout, first.connected | fit.expectation.connected)
    # the stabilizers are judged against the calibrated model with the outlier qubits in it, so a
    # bad qubit's neighbours are not named again
    with_bad = _with_qubits(build(fit.model), fit, layout)
    explained = expectation(dem_of(with_bad)).detection_probability()
    measured, mcounts = _measured_eps(ev, with_bad, rounds=rounds)
    stages, logical = [], []
    if stage_rule is not None and out_dir is not None:
        points = read_logical_csv(logical_csv, default_rounds=None) if logical_csv else []
        stages, logical = _sample(target, base, fit, points, build=build, distance=distance, rounds=rounds,
                                  basis=basis, out_dir=Path(out_dir), rule=stage_rule, workers=workers,
                                  console=console)
    elif logical_csv:
        read_logical_csv(logical_csv)
    return Calibration(
        target=target, distance=distance, rounds=rounds, basis=basis, source=ev.source,
        num_shots=ev.num_shots, layout=layout, classes=classes,
        data_detection=counts.detection_probability(), model_detection=first.detection_probability(),
        cal_detection=fit.expectation.detection_probability(), data_pairs=counts.pair_matrix(),
        model_pairs=first.pair_probability(), cal_pairs=fit.expectation.pair_probability(), fit=fit,
        keys=keys, stabilizers=stabilizer_rows(counts, layout, explained),
        unexpected=unexpected_pairs(counts, classes, threshold=threshold), measured=measured,
        measured_counts=mcounts, stages=stages, logical=logical, calibrated_toml=text, threshold=threshold)


def _with_qubits(circuit: stim.Circuit, fit: ExcessFit, layout: DetectorLayout) -> stim.Circuit:
    index = {xy: q for q, xy in layout.qubits.items()}
    for q in fit.qubits:
        circuit = with_qubit_noise(circuit, qubit=index[q.qubit], p=q.best)
        for kind, value in (("readout", q.readout[0]), ("gate_1q", q.gate_1q[0])):
            if value > 0:
                circuit = with_qubit_noise(circuit, qubit=index[q.qubit], p=value, kind=kind)
    return circuit


def _measured_eps(ev: Any, circuit: stim.Circuit, *, rounds: int) -> tuple[Interval | None, tuple[int, int] | None]:
    """Decode the measured events with the best model (``circuit``: the calibrated model with
    the outlier qubits in it; pymatching) and count failures."""
    if ev.observables is None:
        return None, None
    import pymatching

    matcher = pymatching.Matching.from_detector_error_model(detector_error_model_for(circuit))
    predicted = matcher.decode_batch(ev.packed, bit_packed_shots=True)
    errors = int(np.any(predicted.astype(bool) != ev.observables, axis=1).sum())
    _, cyc = per_cycle_interval(shots=ev.num_shots, errors=errors, rounds=rounds)
    return cyc, (ev.num_shots, errors)


def _sample(target: Target, base: NoiseModel, fit: ExcessFit, points: Sequence[LogicalPoint], *, build: Any,
            distance: int, rounds: int, basis: str, out_dir: Path, rule: StoppingRule, workers: int | None,
            console: Any) -> tuple[list[Stage], list[LogicalCheck]]:
    """Sample every stage (first principles, then each fitted excess added, largest first) and
    the calibrated model at each measured logical point, in one run into ``out_dir/stages``."""
    from planner.sampling import run_sweep
    from planner.store import SampleStore

    steps = _stage_steps(fit)
    code = target.sweep.code
    layout = layout_of(build(base), basis=basis)

    def task(m: NoiseModel, d: int, r: int, label: str) -> sinter.Task:
        circuit = build(m) if (d, r) == (distance, rounds) else build_memory_circuit(
            m, code=code, distance=d, rounds=r, basis=basis)
        if label.startswith("stage") and "outlier qubits" in label:
            circuit = _with_qubits(circuit, fit, layout)
        meta = task_metadata(code=code, distance=d, basis=basis, rounds=r, axis=label, factor=1.0, scales={})
        return sinter.Task(circuit=circuit, decoder=target.sweep.decoder, json_metadata=meta)

    tasks = [task(with_excess(base, ex), distance, rounds, f"stage {k}: {name}") for k, (name, ex) in enumerate(steps)]
    tasks += [task(fit.model, d, r, f"calibrated d={d} r={r}")
              for d, r in dict.fromkeys((p.distance, p.rounds) for p in points)]
    _, ids = resolved_tasks(tasks)
    store = SampleStore(out_dir / "stages")
    run_sweep(tasks, store=store, rule=rule, workers=workers, console=console)
    have = store.stats_by_id()
    eps = [_eps(have.get(i), t.json_metadata["rounds"]) for i, t in zip(ids, tasks)]
    stages = [Stage(name=name, excess=ex, eps=e[0], shots=e[1], errors=e[2])
              for (name, ex), e in zip(steps, eps)]
    by_point = {f"calibrated d={t.json_metadata['d']} r={t.json_metadata['rounds']}": e
                for t, e in zip(tasks[len(steps):], eps[len(steps):])}
    return stages, [_check(p, by_point[f"calibrated d={p.distance} r={p.rounds}"]) for p in points]


def _stage_steps(fit: ExcessFit) -> list[tuple[str, dict[str, float]]]:
    """(name, excess switched on): first principles, then each fitted excess (largest first),
    then the outlier qubits (when any)."""
    order = sorted((c for c in fit.components if c.best > 0), key=lambda c: -c.best)
    steps: list[tuple[str, dict[str, float]]] = [("first principles", {})]
    for c in order:
        steps.append((f"+ {c.name} excess", {**steps[-1][1], c.name: c.best}))
    if fit.qubits:
        steps.append(("+ outlier qubits " + " ".join(f"{q.qubit[0]:g},{q.qubit[1]:g}" for q in fit.qubits),
                      dict(steps[-1][1])))
    return steps


def _check(p: LogicalPoint, model_eps: tuple[Interval | None, int, int]) -> LogicalCheck:
    """A measured point against the calibrated model's sampled rate, sigma in log space."""
    _, measured = per_cycle_interval(shots=p.shots, errors=p.errors, rounds=p.rounds)
    model, _, model_errors = model_eps
    sigma = None
    if model is not None and measured.best > 0 and model.best > 0:
        spread = np.hypot(log_sigma(errors=p.errors), log_sigma(errors=model_errors))
        sigma = float(np.log(measured.best / model.best) / spread)
    return LogicalCheck(point=p, measured=measured, model=model, sigma=sigma)


def _eps(stats: sinter.TaskStats | None, rounds: int) -> tuple[Interval | None, int, int]:
    if stats is None or stats.shots == 0:
        return None, 0, 0
    _, cyc = per_cycle_interval(shots=stats.shots, errors=stats.errors, rounds=rounds)
    return cyc, stats.shots, stats.errors
