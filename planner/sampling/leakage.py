"""The leakage sampler: stim's FlipSimulator stepped layer by layer, with which qubit is leaked in
which shot kept as numpy masks, the partner and readout effects injected as Pauli errors and
measurement overrides, decoded by matching on the Pauli model's detector error model.

A task samples with leakage when its decoder is ``<decoder>+leakage`` (e.g. ``pymatching+leakage``)
and its ``json_metadata["leakage"]`` holds the parameters (the device's ``[device.leakage]`` with
the component scale applied, and the durations heating needs): so the parameters are part of the
task's strong id. :class:`LeakageSampler` is a ``sinter.Sampler``: sinter (and so the store, the
fits, the precision allocator) and the dask engine use it unchanged. The model and its sources
are described in :mod:`planner.config.leakage`.

Per layer, after stim has simulated it (gates and their Pauli noise):

1. two-qubit gates: each partner of a qubit leaked before the gate gets the partner Pauli channel;
   a leaked qubit leaks its non-leaked partner with ``transport``; each participating qubit not
   yet leaked leaks with ``gate_2q``;
2. measurements: a leaked qubit reads 1 (or a random bit), whatever stim recorded;
3. resets: a leaked qubit is returned (to the reset state) with ``reset_removal``;
4. at the end of a round (the measure qubits' readout): leaked qubits decay back with
   ``decay_per_round``, leaked data qubits are removed with ``data_removal``; both come back in
   a random computational state;
5. every qubit leaks with 1 - exp(-``heating_per_us`` t) over the layer's duration t.
"""

from __future__ import annotations

import dataclasses
import math
import time
from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
import sinter
import stim

from planner.sampling.leakage_schedule import (
    LeakLayer,
    ParityMap,
    detector_rounds,
    heating_probability,
    measure_qubits,
    record_index_sets,
    split_layers,
)
from planner.sweep import detector_error_model_for

SUFFIX = "+leakage"
BATCH = 4096  # shots simulated together (a multiple of 256: stim's word size)
DENSE_P = 0.05  # draw Bernoulli(p) arrays densely from this p on, sparsely (by hits) below


def base_decoder(decoder: str) -> str:
    """The matching decoder of a leakage task's decoder name.

    >>> base_decoder("pymatching+leakage")
    'pymatching'
    """
    return decoder.removesuffix(SUFFIX)


def is_leakage_decoder(decoder: str) -> bool:
    return decoder.endswith(SUFFIX)


@dataclasses.dataclass
class LeakageTrace:
    """Sums over shots, per round: leaked data and measure qubits (at the end of each round) and
    detection events (per detector round); divide by ``shots`` for means."""

    rounds: int
    data_leaked: np.ndarray
    measure_leaked: np.ndarray
    detections: np.ndarray
    detectors_per_round: np.ndarray
    num_data: int
    num_measure: int
    shots: int = 0


class _Run:
    """The mutable state of one batch: the simulator, the leak masks, the overrides."""

    def __init__(self, sampler: CompiledLeakageSampler, batch: int) -> None:
        self.s = sampler
        self.sim = stim.FlipSimulator(batch_size=batch, num_qubits=sampler.num_qubits)
        self.leaked = np.zeros((sampler.num_qubits, batch), dtype=np.bool_)
        self.overrides: list[tuple[np.ndarray, np.ndarray]] = []
        self.round = 0

    def hits(self, rows: int, p: float) -> tuple[np.ndarray, np.ndarray]:
        """(row, shot) indices of the hits of independent Bernoulli(p) draws on a (rows, batch)
        array. Small p: a Poisson number of uniform positions with mean -ln(1 - p) each (a
        position hit at least once has probability exactly p, independently), so the cost
        follows the hits, not the array."""
        batch = self.leaked.shape[1]
        if p >= DENSE_P:
            return np.nonzero(self.s.rng.random((rows, batch), dtype=np.float32) < p)
        n = rows * batch
        flat = self.s.rng.integers(0, n, self.s.rng.poisson(-math.log1p(-p) * n))
        return np.divmod(flat, batch)

    def flip(self, qubits: np.ndarray, shots: np.ndarray, *, px: float, py: float, pz: float) -> None:
        """One draw of the Pauli channel (px, py, pz) on each (qubit, shot)."""
        if not len(qubits):
            return
        u = self.s.rng.random(len(qubits))
        for pauli, sel in (("X", u < px + py), ("Z", (u >= px) & (u < px + py + pz))):
            if sel.any():
                mask = np.zeros(self.leaked.shape, dtype=np.bool_)
                mask[qubits[sel], shots[sel]] = True
                self.sim.broadcast_pauli_errors(pauli=pauli, mask=mask)

    def gates(self, layer: LeakLayer) -> None:
        p, a, b, lk = self.s.params, layer.pair_a, layer.pair_b, self.leaked
        la, lb = lk[a], lk[b]  # leaked before the gate
        if self.s.partner_total > 0:
            ia, sa = np.nonzero(la)
            ib, sb = np.nonzero(lb)
            self.flip(np.concatenate([b[ia], a[ib]]), np.concatenate([sa, sb]),
                      px=p["partner_px"], py=p["partner_py"], pz=p["partner_pz"])
        if p["transport"] > 0:
            for src, dst, leaked in ((a, b, la), (b, a, lb)):
                r, c = self.hits(len(src), p["transport"])
                keep = leaked[r, c]
                lk[dst[r[keep]], c[keep]] = True
        if p["gate_2q"] > 0:
            for qs in (a, b):
                r, c = self.hits(len(qs), p["gate_2q"])
                lk[qs[r], c] = True

    def release(self, qubits: np.ndarray, p: float, *, randomize: bool) -> None:
        if p <= 0 or not len(qubits):
            return
        if p >= 1:
            r, c = np.nonzero(self.leaked[qubits])
        else:
            r, c = self.hits(len(qubits), p)
            keep = self.leaked[qubits[r], c]
            r, c = r[keep], c[keep]
        q = qubits[r]
        self.leaked[q, c] = False
        if randomize:  # back in a random computational state: X and Z each with 1/2
            self.flip(q, c, px=0.25, py=0.25, pz=0.25)

    def step(self, layer: LeakLayer, trace: LeakageTrace | None) -> None:
        p = self.s.params
        if len(layer.pair_a):
            self.gates(layer)
        if len(layer.measured):
            self.overrides.append((layer.records, self.leaked[layer.measured].copy()))
        self.release(layer.resets, p["reset_removal"], randomize=False)
        if layer.round_end:
            self.release(self.s.all_qubits, p["decay_per_round"], randomize=True)
            self.release(self.s.data, p["data_removal"], randomize=True)
            if trace is not None and self.round < trace.rounds:
                trace.data_leaked[self.round] += self.leaked[self.s.data].sum()
                trace.measure_leaked[self.round] += self.leaked[self.s.measure].sum()
            self.round += 1
        heat = heating_probability(p, layer.duration_ns)
        if heat > 0:
            r, c = self.hits(len(self.s.all_qubits), heat)
            self.leaked[self.s.all_qubits[r], c] = True

    def measurements(self) -> np.ndarray:
        meas = self.sim.get_measurement_flips()
        for records, leaked in self.overrides:
            if not leaked.any():
                continue
            if self.s.params["readout"] == "random":
                value = self.s.rng.random(leaked.shape, dtype=np.float32) < 0.5
            else:  # reads 1: a flip wherever the noiseless reference reads 0
                value = np.broadcast_to(~self.s.reference[records][:, None], leaked.shape)
            meas[records] = np.where(leaked, value, meas[records])
        return meas


class CompiledLeakageSampler(sinter.CompiledSampler):
    """Samples one task with leakage (see the module doc); ``sample`` returns sinter stats."""

    def __init__(self, task: sinter.Task, *, seed: int | None = None, every_layer: bool = False) -> None:
        """``every_layer``: step through every layer even when nothing leaks (for
        ``leaked_after_first_layer`` with all rates zero)."""
        self.task = task
        self.circuit = task.circuit
        self.params: dict[str, Any] = dict(task.json_metadata["leakage"])
        self.partner_total = sum(float(self.params[k]) for k in ("partner_px", "partner_py", "partner_pz"))
        self.rng = np.random.default_rng(seed)
        self.num_qubits = self.circuit.num_qubits
        layers = split_layers(self.circuit, self.params)
        self.layers = layers if every_layer else _joined(layers, self.params)
        self.measure = measure_qubits(self.layers)
        used = sorted({int(t.value) for inst in self.circuit.flattened() for t in inst.targets_copy()
                       if t.is_qubit_target})
        self.all_qubits = np.array(used, dtype=np.int64)
        self.data = np.setdiff1d(self.all_qubits, self.measure)
        self.reference = np.asarray(self.circuit.reference_sample(), dtype=np.bool_)
        dets, obs = record_index_sets(self.circuit)
        self.detectors, self.observables = ParityMap.from_sets(dets), ParityMap.from_sets(obs)
        dem = task.detector_error_model or detector_error_model_for(self.circuit)
        self.decoder = sinter.BUILT_IN_DECODERS[base_decoder(task.decoder)].compile_decoder_for_dem(dem=dem)
        self.det_rounds = detector_rounds(self.circuit)

    def simulate(self, batch: int, trace: LeakageTrace | None = None, *,
                 leaked_after_first_layer: Sequence[int] = ()) -> tuple[np.ndarray, np.ndarray]:
        """One batch: detection events and observable flips, both bool, shape (rows, batch).
        ``leaked_after_first_layer``: qubits put in the leaked state in every shot once the first
        layer (the initial reset) is done (to study one leaked qubit's effect)."""
        run = _Run(self, batch)
        for i, layer in enumerate(self.layers):
            run.sim.do(layer.ops)
            run.step(layer, trace)
            if i == 0 and len(leaked_after_first_layer):
                run.leaked[np.asarray(leaked_after_first_layer, dtype=np.int64)] = True
        meas = run.measurements()
        dets, obs = self.detectors.apply(meas), self.observables.apply(meas)
        if trace is not None:
            np.add.at(trace.detections, self.det_rounds, dets.sum(axis=1))
            trace.shots += batch
        return dets, obs

    def sample(self, suggested_shots: int) -> sinter.AnonTaskStats:
        t0 = time.monotonic()
        batch = BATCH if suggested_shots >= BATCH else max(256, -(-suggested_shots // 256) * 256)
        dets, obs = self.simulate(batch)
        packed = np.packbits(dets.T, axis=1, bitorder="little")
        predictions = self.decoder.decode_shots_bit_packed(bit_packed_detection_event_data=packed)
        actual = np.packbits(obs.T, axis=1, bitorder="little")
        errors = int(np.count_nonzero(np.any(predictions[:, : actual.shape[1]] != actual, axis=1)))
        return sinter.AnonTaskStats(shots=batch, errors=errors, discards=0, seconds=time.monotonic() - t0)

    def new_trace(self, rounds: int) -> LeakageTrace:
        per_round = np.bincount(self.det_rounds, minlength=rounds + 1).astype(np.int64)
        return LeakageTrace(rounds=rounds, data_leaked=np.zeros(rounds), measure_leaked=np.zeros(rounds),
                            detections=np.zeros(len(per_round)), detectors_per_round=per_round,
                            num_data=len(self.data), num_measure=len(self.measure))


def _eventful(layer: LeakLayer, params: Mapping[str, Any]) -> bool:
    """Whether the sampler has anything to do after ``layer`` (else it joins the next one)."""
    if not _leaks(params):
        return False
    return bool(len(layer.pair_a) or len(layer.measured) or len(layer.resets) or layer.round_end
                or heating_probability(params, layer.duration_ns) > 0)


def _leaks(params: Mapping[str, Any]) -> bool:
    return float(params.get("gate_2q", 0)) > 0 or float(params.get("heating_per_us", 0)) > 0


def _joined(layers: list[LeakLayer], params: Mapping[str, Any]) -> list[LeakLayer]:
    """Layers with nothing to do for leakage joined into the eventful layer that follows them."""
    out: list[LeakLayer] = []
    pending = stim.Circuit()
    for layer in layers:
        if _eventful(layer, params):
            out.append(dataclasses.replace(layer, ops=pending + layer.ops))
            pending = stim.Circuit()
        else:
            pending += layer.ops
    if len(pending):
        empty = np.zeros(0, dtype=np.int64)
        out.append(LeakLayer(ops=pending, pair_a=empty, pair_b=empty, measured=empty, records=empty,
                             resets=empty, round_end=False, duration_ns=0.0))
    return out


class LeakageSampler(sinter.Sampler):
    """sinter's custom-sampler entry for ``<decoder>+leakage`` tasks (pass it in
    ``custom_decoders``: see :func:`leakage_samplers`)."""

    def compiled_sampler_for_task(self, task: sinter.Task) -> sinter.CompiledSampler:
        return CompiledLeakageSampler(task)


def leakage_samplers() -> dict[str, sinter.Sampler]:
    """The ``custom_decoders`` entries every sinter call passes: one per matching decoder."""
    return {f"{name}{SUFFIX}": LeakageSampler() for name in ("pymatching", "pymatching-correlated")}


# ---------------------------------------------------------------------------------------------
# the dask engine's worker side (planner.sampling.chunks hands leakage chunks here)

_chunk_cache: dict[str, CompiledLeakageSampler] = {}


def leakage_of(task: sinter.Task) -> dict[str, Any] | None:
    """The leakage parameters of a leakage task (None for a Pauli task)."""
    meta = task.json_metadata
    if not is_leakage_decoder(str(task.decoder)) or not isinstance(meta, Mapping):
        return None
    return dict(meta["leakage"])


def sample_leakage_chunk(*, strong_id: str, circuit_text: str, decoder: str, shots: int,
                         leakage: Mapping[str, Any]) -> tuple[int, int, float]:
    """Runs on a dask worker: (shots, errors, seconds) of at least ``shots`` shots of a leakage
    task (whole batches of 256)."""
    sampler = _chunk_cache.get(strong_id)
    if sampler is None:
        task = sinter.Task(circuit=stim.Circuit(circuit_text), decoder=decoder,
                           json_metadata={"leakage": dict(leakage)})
        sampler = _chunk_cache[strong_id] = CompiledLeakageSampler(task)
        while len(_chunk_cache) > 4:
            _chunk_cache.pop(next(iter(_chunk_cache)))
    done = errors = 0
    seconds = 0.0
    while done < shots:
        stats = sampler.sample(shots - done)
        done, errors, seconds = done + stats.shots, errors + stats.errors, seconds + stats.seconds
    return done, errors, seconds
