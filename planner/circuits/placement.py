"""Placing each component's noise at its locations in a layered circuit (internal to
:mod:`planner.circuits`; see its module doc for where each channel goes)."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping, Sequence
from typing import Any

import stim

from planner.circuits.layers import _GATES_1Q, _GATES_2Q, _MEASURE_FLIP, _RESET_FLIP, _TICK, _Item, _Layer, _Repeat
from planner.noise import Coords, NoiseModel

# ---------------------------------------------------------------------------------------------
# noise placement


def _emit_ops(layer: _Layer, model: NoiseModel, out: stim.Circuit, where: _Where) -> set[int]:
    """The layer's operations, each with its noise; returns the qubits they touch."""
    touched: set[int] = set()
    for op in layer.ops:
        targets = [t.value for t in op.targets_copy()]
        if touched.intersection(targets) or len(set(targets)) != len(targets):
            raise ValueError(f"{op}: a qubit is used twice in one layer")
        touched.update(targets)
        if op.name in _MEASURE_FLIP:
            _add_each(out, _MEASURE_FLIP[op.name], targets, where.probabilities(model, "readout", targets))
        out.append(op)
        if op.name in _GATES_1Q:
            _add_each(out, "DEPOLARIZE1", targets, where.probabilities(model, "gate_1q", targets))
        elif op.name in _GATES_2Q:
            _add_each(out, "DEPOLARIZE2", targets, where.pair_probabilities(model, targets), arity=2)
        if op.name in _RESET_FLIP:
            _add_each(out, _RESET_FLIP[op.name], targets, where.probabilities(model, "reset", targets))
    return touched


def _emit_idle(layer: _Layer, touched: set[int], *, model: NoiseModel, where: _Where,
               out: stim.Circuit) -> None:
    """Idle noise on every qubit the layer leaves alone, over the layer's duration."""
    names = {op.name for op in layer.ops}
    has_measure = bool(names & set(_MEASURE_FLIP))
    has_reset = bool(names & set(_RESET_FLIP))
    duration = model.layer_duration_ns(has_2q=bool(names & _GATES_2Q), has_1q=bool(names & _GATES_1Q),
                                       has_measure=has_measure, has_reset=has_reset)
    idle = [q for q in where.qubits if q not in touched]
    during = has_measure or has_reset
    shared = model.idle_channel(duration_ns=duration, during_measure=during)
    channels = [shared if (xy := where.own(q)) is None else
                model.idle_channel(duration_ns=duration, during_measure=during, at=xy) for q in idle]
    twirls = [(tw.px, tw.py, tw.pz) if tw.total > 0 else None for tw, _ in channels]
    _add_each(out, "PAULI_CHANNEL_1", idle, twirls)
    _add_each(out, "DEPOLARIZE1", idle, [excess for _, excess in channels])


@dataclasses.dataclass(frozen=True)
class _Where:
    """The circuit's qubits and, for the ones with their own values in the model, their
    coordinates (qubits without own values get the component values, looked up once)."""

    qubits: Sequence[int]
    coords: Mapping[int, Coords]
    listed: frozenset[Coords]

    def own(self, q: int) -> Coords | None:
        xy = self.coords.get(q)
        return xy if xy in self.listed else None

    def probabilities(self, model: NoiseModel, component: str, targets: Sequence[int]) -> list[float]:
        shared = model.probability(component)
        return [shared if (xy := self.own(q)) is None else model.probability(component, at=xy)
                for q in targets]

    def pair_probabilities(self, model: NoiseModel, targets: Sequence[int]) -> list[float]:
        shared = model.probability("gate_2q")
        if not model.pairs:
            return [shared] * (len(targets) // 2)
        out = []
        for a, b in zip(targets[::2], targets[1::2]):
            ends = (self.coords.get(a), self.coords.get(b))
            out.append(model.probability("gate_2q", at=ends) if None not in ends else shared)  # type: ignore[arg-type]
        return out


def where_for(model: NoiseModel, qubits: Sequence[int], coords: Mapping[int, Coords]) -> _Where:
    return _Where(qubits=qubits, coords=coords, listed=frozenset(q.coords for q in model.qubits))


def _emit(items: Sequence[_Item], *, model: NoiseModel, where: _Where, out: stim.Circuit,
          final_index: int) -> None:
    for index, it in enumerate(items):
        if it is _TICK:
            out.append("TICK")
            continue
        if isinstance(it, _Repeat):
            body = stim.Circuit()
            _emit(it.items, model=model, where=where, out=body, final_index=-1)
            out.append(stim.CircuitRepeatBlock(it.count, body))
            continue
        assert isinstance(it, _Layer)  # the item union has three members
        for inst in it.head:
            out.append(inst)
        touched = _emit_ops(it, model, out, where)
        if index != final_index:
            _emit_idle(it, touched, model=model, where=where, out=out)
        for inst in it.tail:
            out.append(inst)


def _add_each(out: stim.Circuit, name: str, targets: Sequence[int], args: Sequence[Any], *,
              arity: int = 1) -> None:
    """Append ``name`` with each target group's own argument (a probability, or a tuple of them;
    None or 0 leaves the group out): one instruction per distinct argument, in the order they
    first appear, targets in their order. With one argument for all it is exactly :func:`_add`."""
    groups: dict[Any, list[int]] = {}
    for k, arg in enumerate(args):
        if arg:
            groups.setdefault(arg, []).extend(targets[k * arity:(k + 1) * arity])
    for arg, group in groups.items():
        out.append(name, group, list(arg) if isinstance(arg, tuple) else arg)
