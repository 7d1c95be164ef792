"""The circuit as a list of layers, TICKs and REPEAT blocks, and the CX -> CZ rewrite on it
(internal to :mod:`planner.circuits`)."""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Sequence

import stim


_GATES_1Q = frozenset({"H", "S", "S_DAG", "SQRT_X", "SQRT_X_DAG", "X", "Y", "Z", "I"})
_GATES_2Q = frozenset({"CX", "CZ"})
#: measurement -> the flip that corrupts its result (placed before it)
_MEASURE_FLIP = {"M": "X_ERROR", "MX": "Z_ERROR", "MR": "X_ERROR", "MRX": "Z_ERROR"}
#: reset -> the flip that corrupts the prepared state (placed after it)
_RESET_FLIP = {"R": "X_ERROR", "RX": "Z_ERROR", "MR": "X_ERROR", "MRX": "Z_ERROR"}
_ANNOTATIONS = frozenset({"DETECTOR", "OBSERVABLE_INCLUDE", "SHIFT_COORDS", "QUBIT_COORDS"})
_NOISE = frozenset({"DEPOLARIZE1", "DEPOLARIZE2", "X_ERROR", "Z_ERROR", "Y_ERROR", "PAULI_CHANNEL_1",
                    "PAULI_CHANNEL_2"})
_OPERATIONS = _GATES_1Q | _GATES_2Q | frozenset(_MEASURE_FLIP) | frozenset(_RESET_FLIP)


# ---------------------------------------------------------------------------------------------
# the circuit as a list of layers, ticks and repeat blocks


@dataclasses.dataclass
class _Layer:
    """Instructions between two TICKs: annotations before the operations, the operations,
    annotations after them (mutable while the circuit is rewritten; never leaves the module)."""

    head: list[stim.CircuitInstruction] = dataclasses.field(default_factory=list)
    ops: list[stim.CircuitInstruction] = dataclasses.field(default_factory=list)
    tail: list[stim.CircuitInstruction] = dataclasses.field(default_factory=list)

    def empty(self) -> bool:
        return not (self.head or self.ops or self.tail)

    def h_only(self) -> bool:
        return bool(self.ops) and all(op.name == "H" for op in self.ops)


@dataclasses.dataclass
class _Repeat:
    count: int
    items: list[_Item]


class _Tick:
    """The TICK between two layers."""


_TICK = _Tick()
_Item = _Layer | _Repeat | _Tick


def _block_edge_pending(items: list[_Item]) -> bool:
    """The last item is a REPEAT block that does not end with a TICK."""
    last = items[-1] if items else None
    return isinstance(last, _Repeat) and bool(last.items) and last.items[-1] is not _TICK


def _check_operation(inst: stim.CircuitInstruction) -> None:
    if inst.name not in _OPERATIONS:
        raise ValueError(f"{inst.name} is not an operation this module can place noise for")
    if any(not t.is_qubit_target for t in inst.targets_copy()):
        raise ValueError(f"{inst}: only plain qubit targets are supported")


def _parse(circuit: stim.Circuit) -> list[_Item]:
    items: list[_Item] = []
    layer = _Layer()

    def flush() -> None:
        nonlocal layer
        if not layer.empty():
            items.append(layer)
        layer = _Layer()

    for inst in circuit:
        if isinstance(inst, stim.CircuitRepeatBlock):
            flush()
            body = _parse(inst.body_copy())
            # a block edge is a layer edge: make it a TICK too, so that flattening the circuit
            # (or reading it TICK by TICK) shows the same layers the noise was placed for
            if items and isinstance(items[-1], _Layer) and body and body[0] is not _TICK:
                items.append(_TICK)
            items.append(_Repeat(inst.repeat_count, body))
        elif inst.name == "TICK":
            flush()
            items.append(_TICK)
        elif inst.name in _ANNOTATIONS:
            (layer.tail if layer.ops else layer.head).append(inst)
        else:
            _check_operation(inst)
            if layer.empty() and _block_edge_pending(items):
                items.append(_TICK)  # the block edge again (see above)
            elif layer.tail:
                # an operation after the detectors of a readout starts a new layer (module doc)
                flush()
                items.append(_TICK)
            layer.ops.append(inst)
    flush()
    return items


def _qubits_of(items: Iterable[_Item]) -> set[int]:
    found: set[int] = set()
    for it in items:
        if isinstance(it, _Layer):
            for op in it.ops:
                found.update(t.value for t in op.targets_copy())
        elif isinstance(it, _Repeat):
            found |= _qubits_of(it.items)
    return found


# ---------------------------------------------------------------------------------------------
# gate-set rewrite


def _to_cz(items: Sequence[_Item]) -> list[_Item]:
    """Every CX c t as H t; CZ c t; H t (three layers), then Hadamards that meet cancelled."""
    out: list[_Item] = []
    for it in items:
        if isinstance(it, _Repeat):
            out.append(_Repeat(it.count, _to_cz(it.items)))
        elif isinstance(it, _Layer) and any(op.name == "CX" for op in it.ops):
            cx_targets = [t.value for op in it.ops if op.name == "CX" for t in op.targets_copy()]
            hadamards = cx_targets[1::2]
            ops = [stim.CircuitInstruction("CZ", op.targets_copy(), op.gate_args_copy())
                   if op.name == "CX" else op for op in it.ops]
            out += [_Layer(head=it.head, ops=[stim.CircuitInstruction("H", hadamards)]), _TICK,
                    _Layer(ops=ops), _TICK,
                    _Layer(ops=[stim.CircuitInstruction("H", hadamards)], tail=it.tail)]
        else:
            out.append(it)
    return _drop_empty(_merge_hadamards(out))


def _merges_with_previous(out: list[_Item], it: _Item) -> bool:
    """``it`` is an H-only layer one TICK after another H-only layer (no annotations between)."""
    return (isinstance(it, _Layer) and it.h_only() and not it.head and len(out) >= 2
            and out[-1] is _TICK and isinstance(out[-2], _Layer) and out[-2].h_only()
            and not out[-2].tail)


def _hadamard_parity(first: _Layer, second: _Layer) -> _Layer:
    """One layer for two H-only layers: H on each qubit hit an odd number of times."""
    odd: dict[int, int] = {}
    for op in first.ops + second.ops:
        for t in op.targets_copy():
            odd[t.value] = odd.get(t.value, 0) ^ 1
    kept = [q for q, parity in odd.items() if parity]
    return _Layer(head=first.head, ops=[stim.CircuitInstruction("H", kept)] if kept else [], tail=second.tail)


def _merge_hadamards(items: list[_Item]) -> list[_Item]:
    """Merge H-only layers that follow each other (one TICK apart) by per-qubit parity."""
    out: list[_Item] = []
    for it in items:
        if _merges_with_previous(out, it):
            prev = out[-2]
            assert isinstance(prev, _Layer) and isinstance(it, _Layer)  # narrowed above; for the type checker
            out[-2] = _hadamard_parity(prev, it)
            out.pop()  # the TICK between them: they are one layer now
        else:
            out.append(it)
    return out


def _keep_annotations(it: _Layer, out: list[_Item], carry: list[stim.CircuitInstruction]) -> None:
    """An empty layer's annotations, in order: onto the previous layer's tail, else carried forward."""
    if not (it.head or it.tail):
        return
    prev = next((x for x in reversed(out) if not isinstance(x, _Tick)), None)
    if isinstance(prev, _Layer) and not carry:
        prev.tail += it.head + it.tail
    else:
        carry += it.head + it.tail


def _drop_empty(items: list[_Item]) -> list[_Item]:
    """Drop layers left without operations (their annotations move to a neighbour's edge)."""
    out: list[_Item] = []
    carry: list[stim.CircuitInstruction] = []
    for it in items:
        if isinstance(it, _Layer) and not it.ops:
            _keep_annotations(it, out, carry)
            if out and out[-1] is _TICK:
                out.pop()  # its TICK goes with it
            continue
        if isinstance(it, _Layer) and carry:
            it = _Layer(head=carry + it.head, ops=it.ops, tail=it.tail)
            carry = []
        if it is _TICK and out and out[-1] is _TICK:
            continue
        out.append(it)
    if carry:
        out.append(_Layer(head=carry))
    return out


