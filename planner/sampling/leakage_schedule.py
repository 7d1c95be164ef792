"""A memory circuit read as the layers the leakage sampler steps through: what each layer does
that leakage cares about (two-qubit gate pairs, measurements, resets, the end of a round, its
duration), and the circuit pieces stim simulates between them. Pure: builds nothing to sample.

Consecutive layers with nothing for leakage to do are joined into one piece of circuit, so the
sampler calls stim once for them (with leakage off, the whole circuit is one piece).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from typing import Any

import numpy as np
import stim

_GATES_2Q = frozenset({"CZ", "CX"})
_MEASURES = frozenset({"M", "MX", "MR", "MRX"})
_RESETS = frozenset({"R", "RX", "MR", "MRX"})
_ROUND_END = frozenset({"MR", "MRX"})  # the measure qubits' readout closes a round
_ANNOTATIONS = frozenset({"DETECTOR", "OBSERVABLE_INCLUDE", "SHIFT_COORDS", "QUBIT_COORDS"})
_EMPTY = np.zeros(0, dtype=np.int64)


@dataclasses.dataclass(frozen=True)
class LeakLayer:
    """One layer (between TICKs): ``ops`` (stim instructions, noise included, no annotations),
    the two-qubit pairs (``pair_a[i]``, ``pair_b[i]``), the measured qubits and their record
    indices, the reset qubits, whether it closes a round, its duration in ns."""

    ops: stim.Circuit
    pair_a: np.ndarray
    pair_b: np.ndarray
    measured: np.ndarray
    records: np.ndarray
    resets: np.ndarray
    round_end: bool
    duration_ns: float


def _durations(params: Mapping[str, Any], names: set[str]) -> float:
    """The layer's duration from the kinds of operation in it (as planner.noise does)."""
    if names & (_MEASURES | _RESETS):
        return (float(params.get("measure_ns", 0.0)) if names & _MEASURES else 0.0) + \
            (float(params.get("reset_ns", 0.0)) if names & _RESETS else 0.0)
    if names & _GATES_2Q:
        return float(params.get("gate_2q_ns", 0.0))
    return float(params.get("gate_1q_ns", 0.0)) if names else 0.0


def _layer(insts: list[stim.CircuitInstruction], first_record: int,
           params: Mapping[str, Any]) -> tuple[LeakLayer, int]:
    ops = stim.Circuit()
    pa: list[int] = []
    pb: list[int] = []
    measured: list[int] = []
    resets: list[int] = []
    names: set[str] = set()
    for inst in insts:
        if inst.name in _ANNOTATIONS:
            continue
        ops.append(inst)
        qs = [t.value for t in inst.targets_copy()]
        if inst.name in _GATES_2Q:
            pa += qs[0::2]
            pb += qs[1::2]
        if inst.name in _MEASURES:
            measured += qs
        if inst.name in _RESETS:
            resets += qs
        names.add(inst.name)
    arr = lambda xs: np.array(xs, dtype=np.int64) if xs else _EMPTY  # noqa: E731
    records = np.arange(first_record, first_record + len(measured), dtype=np.int64)
    layer = LeakLayer(ops=ops, pair_a=arr(pa), pair_b=arr(pb), measured=arr(measured), records=records,
                      resets=arr(resets), round_end=bool(names & _ROUND_END),
                      duration_ns=_durations(params, names & (_GATES_2Q | _MEASURES | _RESETS | {"H"})))
    return layer, first_record + len(measured)


def split_layers(circuit: stim.Circuit, params: Mapping[str, Any]) -> list[LeakLayer]:
    """The flattened circuit's TICK-delimited layers (see :class:`LeakLayer`).

    >>> c = stim.Circuit("R 0 1\\nTICK\\nCZ 0 1\\nTICK\\nMR 1\\nM 0")
    >>> [(len(x.pair_a), x.records.tolist(), x.round_end) for x in split_layers(c, {})]
    [(0, [], False), (1, [], False), (0, [0, 1], True)]
    """
    layers: list[LeakLayer] = []
    current: list[stim.CircuitInstruction] = []
    record = 0
    for inst in circuit.flattened():
        if inst.name == "TICK":
            if current:
                layer, record = _layer(current, record, params)
                layers.append(layer)
            current = []
        else:
            current.append(inst)
    if current:
        layers.append(_layer(current, record, params)[0])
    return layers


def measure_qubits(layers: list[LeakLayer]) -> np.ndarray:
    """Qubits read out mid-circuit (the measure qubits); the others are data qubits."""
    found = {int(q) for la in layers if la.round_end for q in la.measured}
    return np.array(sorted(found), dtype=np.int64)


def heating_probability(params: Mapping[str, Any], duration_ns: float) -> float:
    """Probability that heating leaks a qubit over ``duration_ns``: 1 - exp(-rate t).

    >>> round(heating_probability({"heating_per_us": 1e-3}, 1000.0), 9)
    0.0009995
    """
    rate = float(params.get("heating_per_us", 0.0))
    return -math.expm1(-rate * duration_ns / 1000.0) if rate > 0 else 0.0


def record_index_sets(circuit: stim.Circuit) -> tuple[list[list[int]], list[list[int]]]:
    """The absolute measurement indices each detector, and each observable, is the parity of."""
    detectors: list[list[int]] = []
    observables: list[list[int]] = [[] for _ in range(circuit.num_observables)]
    count = 0
    for inst in circuit.flattened():
        if inst.name == "DETECTOR":
            detectors.append([count + t.value for t in inst.targets_copy()])
        elif inst.name == "OBSERVABLE_INCLUDE":
            k = int(inst.gate_args_copy()[0])
            observables[k] += [count + t.value for t in inst.targets_copy() if t.is_measurement_record_target]
        elif inst.name in _MEASURES:
            count += len(inst.targets_copy())
    return detectors, observables


@dataclasses.dataclass(frozen=True)
class ParityMap:
    """Parities of measurement rows, grouped by how many rows each has (for a numpy XOR)."""

    groups: tuple[tuple[np.ndarray, np.ndarray], ...]  # (output rows, index matrix [n, k])
    size: int

    @classmethod
    def from_sets(cls, sets: list[list[int]]) -> ParityMap:
        by_len: dict[int, list[int]] = {}
        for i, s in enumerate(sets):
            by_len.setdefault(len(s), []).append(i)
        groups = tuple((np.array(rows, dtype=np.int64), np.array([sets[r] for r in rows], dtype=np.int64))
                       for k, rows in sorted(by_len.items()) if k)
        return cls(groups=groups, size=len(sets))

    def apply(self, meas: np.ndarray) -> np.ndarray:
        """Parities of the rows of ``meas`` (shape (measurements, shots)): shape (size, shots)."""
        out = np.zeros((self.size, meas.shape[1]), dtype=meas.dtype)
        for rows, idx in self.groups:
            acc = meas[idx[:, 0]].copy()
            for j in range(1, idx.shape[1]):
                acc ^= meas[idx[:, j]]
            out[rows] = acc
        return out


def detector_rounds(circuit: stim.Circuit) -> np.ndarray:
    """Round of each detector: its time coordinate (stim's generated circuits put it third), or
    0 where a detector has none."""
    coords = circuit.get_detector_coordinates()
    return np.array([int(coords[i][2]) if len(coords.get(i, [])) > 2 else 0
                     for i in range(circuit.num_detectors)], dtype=np.int64)
