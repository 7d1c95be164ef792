"""Noisy memory circuits: stim's noiseless generators, the native gate set, each component's noise.

:func:`build_memory_circuit` takes stim's own noiseless rotated surface-code or repetition-code
memory circuit, rewrites it into the device's native two-qubit gate (CX kept, or each CX as
H-CZ-H with the Hadamards that meet cancelled) and then places every component of a
:class:`~planner.noise.NoiseModel` at its locations, layer by layer (a layer is what lies between
two TICKs):

- after each single-qubit gate ``DEPOLARIZE1(gate_1q)`` on its targets, after each two-qubit gate
  ``DEPOLARIZE2(gate_2q)``;
- before each measurement a ``readout`` flip (X_ERROR before M/MR, Z_ERROR before MX/MRX), after
  each reset a ``reset`` flip (X_ERROR after R/MR, Z_ERROR after RX/MRX);
- on every qubit the layer leaves alone, the idle channel of that layer's duration:
  ``PAULI_CHANNEL_1`` (twirled T1/T2) and ``DEPOLARIZE1`` (excess), from ``idle`` in gate layers
  and ``idle_measure`` in layers that measure or reset.

Choices made here (they change sampled numbers, so they are stated once):

- stim's generators leave out the TICK between the last ancilla readout and the final data
  readout. We put it back (a new layer starts at an operation that follows a layer's
  DETECTOR/OBSERVABLE_INCLUDE/SHIFT_COORDS, or a REPEAT block), so the data qubits idle
  through every ancilla readout, including the last one, for every round count, and the
  flattened circuit read TICK by TICK shows the layers the noise was placed for.
- The final layer (the data readout) gets no idle noise: the qubits it leaves alone are never
  used again, so noise on them could not change any detector or observable.
- Hadamards cancel only between adjacent H-only layers in the same block body; a REPEAT body is
  kept (never unrolled), so Hadamards across its boundary are left as they are.
- Channels whose probability is 0 are left out, so a perfect component leaves no instruction.
- Probabilities carry the 6 significant digits of stim's text form (what sinter samples).

This module builds circuits; it samples nothing.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Sequence

import stim

from planner.config import distance_problem, size_problem
from planner.errors import InputError
from planner.noise import NoiseModel

CODES: tuple[str, ...] = ("surface", "repetition")

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
# public API


def noiseless_memory_circuit(*, code: str, distance: int, rounds: int, basis: str) -> stim.Circuit:
    """stim's own noiseless memory circuit for ``code`` ("surface" rotated, or "repetition").

    >>> noiseless_memory_circuit(code="repetition", distance=3, rounds=1, basis="z").num_detectors
    4
    """
    if code not in CODES:
        raise ValueError(f"unknown code {code!r}; known: {', '.join(CODES)}")
    if (problem := distance_problem(distance)) is not None:
        raise InputError(problem, field="distance")
    if isinstance(rounds, bool) or not isinstance(rounds, int) or rounds < 1:
        raise ValueError(f"rounds must be an integer >= 1, got {rounds!r}")
    # estimate the size before stim builds anything: a huge circuit would take minutes and gigabytes
    problem = size_problem(code=code, distance=distance, rounds=rounds)
    if problem is not None:
        raise ValueError(problem)
    if code == "surface":
        if basis not in ("z", "x"):
            raise ValueError(f"basis must be 'z' or 'x' for the surface code, got {basis!r}")
        return stim.Circuit.generated(f"surface_code:rotated_memory_{basis}", distance=distance,
                                      rounds=rounds)
    if basis != "z":
        raise ValueError(f"the repetition-code memory exists in basis 'z' only, got {basis!r}")
    return stim.Circuit.generated("repetition_code:memory", distance=distance, rounds=rounds)


def build_memory_circuit(model: NoiseModel, *, code: str, distance: int, rounds: int,
                         basis: str) -> stim.Circuit:
    """The noisy memory circuit the sweep samples: ``distance`` (odd, >= 3), ``rounds`` (>= 1)
    rounds of stabilizer measurement, logical ``basis`` "z" or "x" (repetition code: "z" only),
    in ``model.native_2q`` with every component of ``model`` placed (see the module doc).

    >>> c = build_memory_circuit(NoiseModel.sd6(0.001), code="surface", distance=3, rounds=3, basis="z")
    >>> len(c.shortest_graphlike_error())
    3
    """
    if model.native_2q not in ("cx", "cz"):
        raise ValueError(f"native_2q must be 'cx' or 'cz', got {model.native_2q!r}")
    base = noiseless_memory_circuit(code=code, distance=distance, rounds=rounds, basis=basis)
    items = _parse(base)
    if model.native_2q == "cz":
        items = _to_cz(items)
    qubits = sorted(_qubits_of(items))
    out = stim.Circuit()
    last = max((i for i, it in enumerate(items) if isinstance(it, _Layer)), default=-1)
    _emit(items, model=model, qubits=qubits, out=out, final_index=last)
    # stim writes (and pickles, which is how sinter ships tasks to its workers) arguments with 6
    # significant digits: return that circuit, so the one printed, hashed and sampled are one
    return stim.Circuit(str(out))


@dataclasses.dataclass(frozen=True)
class LayerSummary:
    """One layer (between TICKs) of a flattened circuit: which operations, which noise.

    ``gates``: operation name -> number of targets it acts on (a CZ on 2 pairs counts 4);
    ``noise``: noise channel name -> number of targets. ``qubits``: qubits operated on.
    """

    gates: dict[str, int]
    noise: dict[str, int]
    qubits: frozenset[int]

    @property
    def has_2q(self) -> bool:
        return any(g in _GATES_2Q for g in self.gates)

    @property
    def has_1q(self) -> bool:
        return any(g in _GATES_1Q for g in self.gates)

    @property
    def has_measure(self) -> bool:
        return any(g in _MEASURE_FLIP for g in self.gates)

    @property
    def has_reset(self) -> bool:
        return any(g in _RESET_FLIP for g in self.gates)

    @property
    def kind(self) -> str:
        """"measure+reset", "measure", "reset", "2q", "1q" or "empty" (slowest kind first)."""
        if self.has_measure and self.has_reset:
            return "measure+reset"
        for flag, name in ((self.has_measure, "measure"), (self.has_reset, "reset"),
                           (self.has_2q, "2q"), (self.has_1q, "1q")):
            if flag:
                return name
        return "empty"

    def duration_ns(self, model: NoiseModel) -> float:
        """The layer's duration in ns under ``model`` (its slowest kind of operation)."""
        return model.layer_duration_ns(has_2q=self.has_2q, has_1q=self.has_1q,
                                       has_measure=self.has_measure, has_reset=self.has_reset)


def layer_summary(circuit: stim.Circuit) -> list[LayerSummary]:
    """Describe each TICK-delimited layer of ``circuit`` (REPEAT blocks flattened).

    >>> [s.kind for s in layer_summary(stim.Circuit("R 0 1\\nTICK\\nCX 0 1\\nDEPOLARIZE2(0.1) 0 1\\nTICK\\nM 1"))]
    ['reset', '2q', 'measure']
    """
    layers: list[LayerSummary] = []
    gates: dict[str, int] = {}
    noise: dict[str, int] = {}
    qubits: set[int] = set()

    def close() -> None:
        if gates or noise:
            layers.append(LayerSummary(gates=dict(gates), noise=dict(noise), qubits=frozenset(qubits)))
        gates.clear()
        noise.clear()
        qubits.clear()

    for inst in circuit.flattened():
        name = inst.name
        if name == "TICK":
            close()
        elif name in _NOISE:
            noise[name] = noise.get(name, 0) + len(inst.targets_copy())
        elif name not in _ANNOTATIONS:
            targets = [t.value for t in inst.targets_copy()]
            gates[name] = gates.get(name, 0) + len(targets)
            qubits.update(targets)
    close()
    return layers


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
