"""The qubit layout of a code at a distance: coordinates, roles, neighbours, and the values each
qubit has under a noise model (what ``planner layout`` prints and per-qubit tables are keyed by).

Coordinates are stim's own ``QUBIT_COORDS`` of its rotated surface-code circuits (data qubits at
odd (x, y), measure qubits at even ones). stim's repetition-code circuits carry no coordinates:
there qubit ``i`` is at ``(i, 0)``. The layouts nest: the patch of distance d is the corner at the
origin of the patch of distance d + 2, so a table for a larger chip applies to a smaller patch
(coordinates the smaller patch lacks are ignored there); a coordinate that is no qubit of the
code at any distance is refused (:func:`check_coordinates`).

>>> lay = qubit_layout(code="surface", distance=3)
>>> len(lay.qubits), sum(q.role == "data" for q in lay.qubits), lay.by_coords[(3.0, 3.0)].role
(17, 9, 'data')
"""

from __future__ import annotations

import dataclasses
import functools
import math
from typing import Any

import stim

from planner.config import MAX_DISTANCE, distance_problem
from planner.errors import InputError
from planner.noise import Coords, NoiseModel

ROLES: tuple[str, ...] = ("data", "measure X", "measure Z")
#: stim's generator of each code's memory circuit (the layout is the same in both bases)
_GENERATORS = {"surface": "surface_code:rotated_memory_z", "repetition": "repetition_code:memory"}


@dataclasses.dataclass(frozen=True)
class LayoutQubit:
    """One qubit: stim's index, its coordinates, its role, the qubits it shares a two-qubit gate
    with (coordinates, sorted)."""

    index: int
    coords: Coords
    role: str
    neighbours: tuple[Coords, ...]

    @property
    def key(self) -> str:
        """The qubit's key in a per-qubit table ("x,y")."""
        return coords_text(self.coords)


@dataclasses.dataclass(frozen=True)
class Layout:
    code: str
    distance: int
    qubits: tuple[LayoutQubit, ...]
    #: every coupled pair (coordinates, smaller first), sorted
    pairs: tuple[tuple[Coords, Coords], ...]

    @functools.cached_property
    def by_coords(self) -> dict[Coords, LayoutQubit]:
        return {q.coords: q for q in self.qubits}

    @functools.cached_property
    def pair_set(self) -> frozenset[tuple[Coords, Coords]]:
        return frozenset(self.pairs)

    @functools.cached_property
    def coords_of_index(self) -> dict[int, Coords]:
        return {q.index: q.coords for q in self.qubits}


def coords_text(xy: Coords) -> str:
    """``(3.0, 3.0)`` as ``"3,3"`` (the key of a per-qubit table)."""
    return f"{xy[0]:g},{xy[1]:g}"


def circuit_coordinates(circuit: stim.Circuit, *, code: str) -> dict[int, Coords]:
    """Qubit index -> (x, y): stim's QUBIT_COORDS, or ``(i, 0)`` where a circuit has none."""
    found = circuit.get_final_qubit_coordinates()
    if found:
        return {q: (float(c[0]), float(c[1]) if len(c) > 1 else 0.0) for q, c in found.items()}
    return {q: (float(q), 0.0) for q in range(circuit.num_qubits)}


@functools.lru_cache(maxsize=64)
def qubit_layout(*, code: str, distance: int) -> Layout:
    """The layout of ``code`` ("surface" or "repetition") at ``distance``, read from stim's
    noiseless memory circuit (one round; both bases have the same layout)."""
    if code not in _GENERATORS:
        raise InputError(f"unknown code {code!r}", field="code", allowed=", ".join(_GENERATORS))
    if (problem := distance_problem(distance)) is not None:
        raise InputError(problem, field="distance")
    circuit = stim.Circuit.generated(_GENERATORS[code], distance=distance, rounds=1)
    coords = circuit_coordinates(circuit, code=code)
    controls, measured, links = _couplings(circuit, coords)
    qubits = []
    for q in sorted(coords):
        role = "data" if q not in measured else ("measure X" if q in controls else "measure Z")
        qubits.append(LayoutQubit(index=q, coords=coords[q], role=role,
                                  neighbours=tuple(sorted(coords[n] for n in links[q]))))
    pairs = sorted({tuple(sorted((coords[a], coords[b]))) for a in links for b in links[a]})
    return Layout(code=code, distance=distance, qubits=tuple(qubits), pairs=tuple(pairs))  # type: ignore[arg-type]


def _couplings(circuit: stim.Circuit, coords: dict[int, Coords]) -> tuple[set[int], set[int], dict[int, set[int]]]:
    """(CX controls, qubits measured and reset every round, qubit -> qubits it shares a CX with)."""
    controls: set[int] = set()
    measured: set[int] = set()
    links: dict[int, set[int]] = {q: set() for q in coords}
    for inst in circuit.flattened():
        qs = [t.value for t in inst.targets_copy() if t.is_qubit_target]
        if inst.name == "CX":
            for c, t in zip(qs[::2], qs[1::2]):
                controls.add(c)
                links[c].add(t)
                links[t].add(c)
        elif inst.name in ("MR", "MRX"):
            measured.update(qs)
    return controls, measured, links


# ---------------------------------------------------------------------------------------------
# which coordinates are qubits of the code


def _smallest_distance(code: str, extent: float) -> int:
    """The smallest odd distance whose patch reaches ``extent`` (surface: up to 2d; repetition:
    up to 2d - 2)."""
    d = math.ceil(extent / 2) + (1 if code == "repetition" else 0)
    d = max(3, d)
    return d if d % 2 else d + 1


def _is_qubit(code: str, xy: Coords) -> bool:
    d = _smallest_distance(code, max(xy))
    return any(xy in qubit_layout(code=code, distance=k).by_coords
               for k in (d, d + 2) if k <= MAX_DISTANCE)


def _is_pair(code: str, ends: tuple[Coords, Coords]) -> bool:
    d = _smallest_distance(code, max(max(ends[0]), max(ends[1])))
    return any(ends in qubit_layout(code=code, distance=k).pair_set for k in (d, d + 2) if k <= MAX_DISTANCE)


def check_coordinates(model: NoiseModel, *, code: str) -> None:
    """Refuse (:class:`InputError` naming the table and the key) a per-qubit entry whose
    coordinates are no qubit of ``code`` at any distance, and a per-pair entry that is no coupled
    pair; entries of a larger patch than the one built are fine (see the module doc)."""
    for q in model.qubits:
        if not _is_qubit(code, q.coords):
            raise InputError(f"no qubit of the {code} code has these coordinates at any distance "
                             "(`planner layout TARGET --distance D` prints the coordinates)",
                             source=q.origin or None)
    for p in model.pairs:
        if not _is_pair(code, p.coords):
            raise InputError(f"these qubits share no two-qubit gate in the {code} code at any distance (`planner "
                             "layout TARGET --distance D` prints each qubit's neighbours)",
                             source=p.origin or None)


# ---------------------------------------------------------------------------------------------
# the values each qubit has under a model

#: the per-qubit values a layout row shows (scaled probabilities; times unscaled)
ROW_VALUES: tuple[str, ...] = ("gate_1q", "readout", "reset", "t1_us", "t2_us", "idle_excess",
                               "idle_measure_excess")


def layout_rows(model: NoiseModel, *, code: str, distance: int) -> list[dict[str, Any]]:
    """One JSON-native row per qubit of the layout: index, x, y, key, role, neighbours, the
    values in force (its own where the model lists it, else the component values; probabilities
    with the model's scale factors applied), ``own`` (whether the model lists the qubit) and
    ``gate_2q`` per neighbour.

    >>> rows = layout_rows(NoiseModel.sd6(0.001), code="surface", distance=3)
    >>> rows[0]["key"], rows[0]["role"], rows[0]["readout"]
    ('1,1', 'data', 0.001)
    """
    check_coordinates(model, code=code)
    lay = qubit_layout(code=code, distance=distance)
    listed = {q.coords for q in model.qubits}
    rows = []
    for q in lay.qubits:
        at = q.coords if q.coords in listed else None
        values: dict[str, Any] = {
            "gate_1q": model.probability("gate_1q", at=at),
            "readout": model.probability("readout", at=at),
            "reset": model.probability("reset", at=at),
            "t1_us": _finite(model.qubit_value("t1_us", q.coords)),
            "t2_us": _finite(model.qubit_value("t2_us", q.coords)),
            "idle_excess": model.qubit_value("idle_excess", q.coords) * model.scale("idle"),
            "idle_measure_excess": (model.qubit_value("idle_measure_excess", q.coords)
                                    * model.scale("idle_measure")),
        }
        gate_2q = {coords_text(n): model.probability("gate_2q", at=(q.coords, n)) for n in q.neighbours}
        rows.append({"index": q.index, "x": q.coords[0], "y": q.coords[1], "key": q.key, "role": q.role,
                     "neighbours": [coords_text(n) for n in q.neighbours], **values,
                     "gate_2q": gate_2q, "own": at is not None})
    return rows


def _finite(x: float) -> float | None:
    return x if math.isfinite(x) else None
