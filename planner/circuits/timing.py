"""How long one error-correction cycle takes: the sum of one round's layer durations.

A round's layers are those the memory circuit repeats; the duration of one round is the
difference between circuits of ``r + 1`` and ``r`` rounds (so the first round's resets and the
final data readout, which happen once per experiment, are not counted). Each layer lasts as
long as its slowest kind of operation (:meth:`planner.noise.NoiseModel.layer_duration_ns`).

>>> from planner.noise import NoiseModel
>>> m = NoiseModel(gate_1q=1e-3, gate_2q=1e-3, readout=1e-3, reset=1e-3, t1_us=50, t2_us=40,
...                gate_1q_ns=20, gate_2q_ns=40, measure_ns=500, reset_ns=100)
>>> cycle_duration_ns(m, code="surface")  # 5 Hadamard layers, 4 CZ layers, measure+reset: 5*20 + 4*40 + 600
860.0
"""

from __future__ import annotations

from planner.circuits import build_memory_circuit, layer_summary
from planner.noise import NoiseModel


def _total_ns(model: NoiseModel, *, code: str, rounds: int, basis: str) -> float:
    circuit = build_memory_circuit(model, code=code, distance=3, rounds=rounds, basis=basis)
    return sum(layer.duration_ns(model) for layer in layer_summary(circuit))


def cycle_duration_ns(model: NoiseModel, *, code: str = "surface", basis: str = "z") -> float:
    """Duration in ns of one error-correction cycle (round) of ``code`` under ``model``'s
    durations (the same at every distance: a round's layers do not depend on d)."""
    return _total_ns(model, code=code, rounds=3, basis=basis) - _total_ns(model, code=code, rounds=2, basis=basis)
