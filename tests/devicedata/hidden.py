"""A hidden "true" device for the device-data tests (invented numbers, tests only): the demo chip's
budget, excess error on some components, and optionally one bad qubit inserted here, by hand,
into planner's circuit (the target file cannot state per-qubit values yet)."""

from __future__ import annotations

import dataclasses
from pathlib import Path

import numpy as np
import stim

from planner.circuits import build_memory_circuit
from planner.config import parse_target
from planner.noise import NoiseModel

#: the first-principles target the tests calibrate (the demo chip's numbers, small sweep)
TARGET_TOML = """
[device]
name = "invented test chip"
native_2q = "cz"
[device.errors]
gate_1q = 6e-4
gate_2q = 4.5e-3
readout = 8e-3
reset = 2e-3
idle_measure_excess = 5e-4
[device.coherence]
t1_us = 85.0
t2_us = 70.0
[device.durations]
gate_1q_ns = 25
gate_2q_ns = 35
measure_ns = 550
reset_ns = 150
[goal]
logical_error_per_cycle = 1e-6
[sweep]
distances = [3, 5]
joint_scales = [0.5, 1.0]
"""

#: the excess the hidden device has over TARGET_TOML (probabilities as placed in the circuit)
HIDDEN_EXCESS = {"gate_2q": 1.5e-3, "readout": 3e-3, "idle_measure": 2e-3}

_FIELD = {"gate_2q": "gate_2q", "readout": "readout", "idle_measure": "idle_measure_excess",
          "gate_1q": "gate_1q"}


def write_target(directory: Path) -> Path:
    path = Path(directory) / "chip.toml"
    path.write_text(TARGET_TOML)
    return path


def hidden_circuit(*, distance: int, rounds: int, basis: str = "z", excess: dict[str, float] | None = None,
                   bad_qubit: tuple[float, float] | None = None, bad_readout: float = 0.029,
                   bad_gate_1q: float = 1.4e-3) -> stim.Circuit:
    """The hidden device's circuit. ``bad_qubit``: that qubit gets an extra readout flip before
    each of its measurements and extra DEPOLARIZE1 after each of its single-qubit gates (the
    per-qubit values a target file will hold: the defaults make its readout 0.04 and its gate_1q
    2e-3 with HIDDEN_EXCESS, the demo's bad qubit)."""
    model = NoiseModel.from_target(parse_target(TARGET_TOML))
    changes = {_FIELD[c]: getattr(model, _FIELD[c]) + x for c, x in (excess or {}).items()}
    model = dataclasses.replace(model, **changes)
    circuit = build_memory_circuit(model, code="surface", distance=distance, rounds=rounds, basis=basis)
    if bad_qubit is None:
        return circuit
    q = next(k for k, c in circuit.get_final_qubit_coordinates().items() if tuple(c) == tuple(bad_qubit))
    out = stim.Circuit()
    for inst in circuit.flattened():
        touches = any(t.value == q for t in inst.targets_copy()) if inst.name != "TICK" else False
        if touches and inst.name in ("M", "MR"):
            out.append("X_ERROR", [q], bad_readout)
        out.append(inst)
        if touches and inst.name in ("H", "S", "SQRT_X", "SQRT_X_DAG", "SQRT_Y", "SQRT_Y_DAG"):
            out.append("DEPOLARIZE1", [q], bad_gate_1q)
    return out


def sample(circuit: stim.Circuit, *, shots: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """(detection events, observable flips), bool arrays, from stim's detector sampler."""
    return circuit.compile_detector_sampler(seed=seed).sample(shots, separate_observables=True)
