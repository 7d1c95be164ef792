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
- A qubit (a pair) with its own values in the model (a per-qubit table) gets its own
  probability: each channel is one instruction per distinct probability, in the order the
  targets first appear, so a model whose every qubit has the component values gives exactly the
  circuit of the component values alone. Qubits are matched by their coordinates
  (:mod:`planner.circuits.layout`).

This module builds circuits; it samples nothing.
"""

from __future__ import annotations

import dataclasses

import stim

from planner.circuits.layers import (
    _ANNOTATIONS,
    _GATES_1Q,
    _GATES_2Q,
    _MEASURE_FLIP,
    _NOISE,
    _RESET_FLIP,
    _Layer,
    _parse,
    _qubits_of,
    _to_cz,
)
from planner.circuits.layout import (
    ROLES,
    Layout,
    LayoutQubit,
    check_coordinates,
    circuit_coordinates,
    coords_text,
    layout_rows,
    qubit_layout,
)
from planner.circuits.placement import _emit, where_for
from planner.config import distance_problem, size_problem
from planner.errors import InputError
from planner.noise import NoiseModel

__all__ = ["CODES", "ROLES", "LayerSummary", "Layout", "LayoutQubit", "build_memory_circuit", "check_coordinates",
           "circuit_coordinates", "coords_text", "layer_summary", "layout_rows", "noiseless_memory_circuit",
           "qubit_layout"]

CODES: tuple[str, ...] = ("surface", "repetition")

# ---------------------------------------------------------------------------------------------
# public API


def noiseless_memory_circuit(*, code: str, distance: int, rounds: int, basis: str) -> stim.Circuit:
    """stim's own noiseless memory circuit for ``code`` ("surface" rotated, or "repetition").

    >>> noiseless_memory_circuit(code="repetition", distance=3, rounds=1, basis="z").num_detectors
    4
    """
    if code not in CODES:
        raise InputError(f"unknown code {code!r}", field="code", allowed=", ".join(CODES))
    if (problem := distance_problem(distance)) is not None:
        raise InputError(problem, field="distance")
    if isinstance(rounds, bool) or not isinstance(rounds, int) or rounds < 1:
        raise InputError(f"{rounds!r} is not allowed", field="rounds", allowed="an integer >= 1")
    # estimate the size before stim builds anything: a huge circuit would take minutes and gigabytes
    problem = size_problem(code=code, distance=distance, rounds=rounds)
    if problem is not None:
        raise InputError(problem, field="rounds")
    if code == "surface":
        if basis not in ("z", "x"):
            raise InputError(f"{basis!r} is not a basis of the surface code", field="basis", allowed="z, x")
        return stim.Circuit.generated(f"surface_code:rotated_memory_{basis}", distance=distance,
                                      rounds=rounds)
    if basis != "z":
        raise InputError(f"{basis!r}: the repetition-code memory exists in basis 'z' only", field="basis",
                         allowed="z")
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
        raise InputError(f"{model.native_2q!r} is not a native two-qubit gate", field="native_2q",
                         allowed="cx, cz")
    base = noiseless_memory_circuit(code=code, distance=distance, rounds=rounds, basis=basis)
    items = _parse(base)
    if model.native_2q == "cz":
        items = _to_cz(items)
    qubits = sorted(_qubits_of(items))
    if model.qubits or model.pairs:
        check_coordinates(model, code=code)
    where = where_for(model, qubits, circuit_coordinates(base, code=code))
    out = stim.Circuit()
    last = max((i for i, it in enumerate(items) if isinstance(it, _Layer)), default=-1)
    _emit(items, model=model, where=where, out=out, final_index=last)
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


