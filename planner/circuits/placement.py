"""Placing each component's noise at its locations in a layered circuit (internal to
:mod:`planner.circuits`; see its module doc for where each channel goes)."""

from __future__ import annotations

from collections.abc import Sequence

import stim

from planner.circuits.layers import _GATES_1Q, _GATES_2Q, _MEASURE_FLIP, _RESET_FLIP, _TICK, _Item, _Layer, _Repeat
from planner.noise import NoiseModel

# ---------------------------------------------------------------------------------------------
# noise placement


def _emit_ops(layer: _Layer, model: NoiseModel, out: stim.Circuit) -> set[int]:
    """The layer's operations, each with its noise; returns the qubits they touch."""
    p1, p2 = model.probability("gate_1q"), model.probability("gate_2q")
    p_read, p_reset = model.probability("readout"), model.probability("reset")
    touched: set[int] = set()
    for op in layer.ops:
        targets = [t.value for t in op.targets_copy()]
        if touched.intersection(targets) or len(set(targets)) != len(targets):
            raise ValueError(f"{op}: a qubit is used twice in one layer")
        touched.update(targets)
        if op.name in _MEASURE_FLIP:
            _add(out, _MEASURE_FLIP[op.name], targets, p_read)
        out.append(op)
        if op.name in _GATES_1Q:
            _add(out, "DEPOLARIZE1", targets, p1)
        elif op.name in _GATES_2Q:
            _add(out, "DEPOLARIZE2", targets, p2)
        if op.name in _RESET_FLIP:
            _add(out, _RESET_FLIP[op.name], targets, p_reset)
    return touched


def _emit_idle(layer: _Layer, touched: set[int], *, model: NoiseModel, qubits: Sequence[int],
               out: stim.Circuit) -> None:
    """Idle noise on every qubit the layer leaves alone, over the layer's duration."""
    names = {op.name for op in layer.ops}
    has_measure = bool(names & set(_MEASURE_FLIP))
    has_reset = bool(names & set(_RESET_FLIP))
    duration = model.layer_duration_ns(has_2q=bool(names & _GATES_2Q), has_1q=bool(names & _GATES_1Q),
                                       has_measure=has_measure, has_reset=has_reset)
    twirl, excess = model.idle_channel(duration_ns=duration, during_measure=has_measure or has_reset)
    idle = [q for q in qubits if q not in touched]
    if idle and twirl.total > 0:
        out.append("PAULI_CHANNEL_1", idle, [twirl.px, twirl.py, twirl.pz])
    _add(out, "DEPOLARIZE1", idle, excess)


def _emit(items: Sequence[_Item], *, model: NoiseModel, qubits: Sequence[int], out: stim.Circuit,
          final_index: int) -> None:
    for index, it in enumerate(items):
        if it is _TICK:
            out.append("TICK")
            continue
        if isinstance(it, _Repeat):
            body = stim.Circuit()
            _emit(it.items, model=model, qubits=qubits, out=body, final_index=-1)
            out.append(stim.CircuitRepeatBlock(it.count, body))
            continue
        assert isinstance(it, _Layer)  # the item union has three members
        for inst in it.head:
            out.append(inst)
        touched = _emit_ops(it, model, out)
        if index != final_index:
            _emit_idle(it, touched, model=model, qubits=qubits, out=out)
        for inst in it.tail:
            out.append(inst)


def _add(out: stim.Circuit, name: str, targets: Sequence[int], p: float) -> None:
    """Append a noise channel, unless it could not fire (p = 0 or no targets)."""
    if p > 0 and targets:
        out.append(name, targets, p)
