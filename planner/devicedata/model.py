"""The model's side: the detector layout of a circuit (stabilizer, round, type of every
detector), the EXACT detection and pair probabilities of its detector error model (no
sampling), and the class of every detector pair.

For independent mechanisms q_k (stim's ``error(q)`` lines of the undecomposed model), detector i
fires with probability P_i = (1 - prod_k (1 - 2 q_k)) / 2 over the mechanisms touching i (the
XOR of independent events; common practice, see ../shared/checks.md), and the pair estimator of
:mod:`planner.devicedata.stats` measures the same XOR over the mechanisms touching both i and j.
Both are kept in the additive form -ln(1 - 2p) / 2 (:func:`~planner.devicedata.stats.to_additive`),
where mechanisms add.

Classes (Google Quantum AI, Nature 614, 676 (2023), Fig. 2): ``space-like`` (same round),
``time-like`` (same stabilizer, next round), ``diagonal`` (another stabilizer, next round),
``other`` (some mechanism flips both, further apart), ``unexpected`` (no single mechanism of
the model flips both: a leakage or crosstalk signature when the data shows them correlated).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import stim

from planner.devicedata.stats import to_additive

__all__ = ["CLASSES", "DetectorLayout", "Expectation", "classify_pairs", "expectation", "layout_of",
           "with_qubit_noise"]

CLASSES: tuple[str, ...] = ("space-like", "time-like", "diagonal", "other", "unexpected")


@dataclasses.dataclass(frozen=True)
class DetectorLayout:
    """Per detector: ``xy`` [D, 2] its stabilizer's (measure qubit's) coordinates, ``round``
    [D] (stim's time coordinate; the last is the data readout), ``kind`` [D] the stabilizer
    type ("Z" or "X"). ``qubits``: qubit index -> (x, y) of every qubit of the circuit;
    ``measure``: the measure qubits' coordinates."""

    xy: np.ndarray
    round: np.ndarray
    kind: np.ndarray
    qubits: dict[int, tuple[float, float]]
    measure: frozenset[tuple[float, float]]

    @property
    def num_detectors(self) -> int:
        return int(len(self.round))

    def stabilizers(self) -> list[tuple[float, float]]:
        """Every stabilizer's coordinates, in order of first appearance."""
        return list(dict.fromkeys(map(tuple, self.xy.tolist())))


def layout_of(circuit: stim.Circuit, *, basis: str) -> DetectorLayout:
    """The layout from the circuit's DETECTOR and QUBIT_COORDS annotations (planner's circuits
    are stim's generated ones: detectors carry (x, y, t) of their measure qubit)."""
    coords = circuit.get_detector_coordinates()
    d = circuit.num_detectors
    # surface code: (x, y, t); repetition code: (x, t), placed on the line y = 0
    arr = np.array([_xyt(coords.get(k, [])) for k in range(d)], dtype=float).reshape(d, 3)
    xy, t = arr[:, :2], arr[:, 2].astype(int)
    first = {tuple(p) for p, r in zip(xy.tolist(), t) if r == t.min()}
    other = "X" if basis.lower() == "z" else "Z"
    kind = np.array([basis.upper() if tuple(p) in first else other for p in xy.tolist()])
    # a circuit without QUBIT_COORDS (stim's repetition code) places qubit q at (q, 0)
    given = circuit.get_final_qubit_coordinates()
    qubits = {q: (float(given[q][0]), float(given[q][1])) if len(given.get(q, [])) >= 2 else (float(q), 0.0)
              for q in range(circuit.num_qubits)}
    measure = frozenset(tuple(p) for p in xy.tolist())
    return DetectorLayout(xy=xy, round=t, kind=kind, qubits=qubits, measure=measure)


def _xyt(c: list[float]) -> list[float]:
    if len(c) >= 3:
        return list(c[:3])
    if len(c) == 2:
        return [c[0], 0.0, c[1]]
    return [float("nan"), float("nan"), 0.0]


@dataclasses.dataclass(frozen=True)
class Expectation:
    """A model's exact statistics in additive form: ``single`` [D] and ``pair`` [D, D]
    (symmetric, zero where no mechanism touches both), ``connected`` [D, D] bool."""

    single: np.ndarray
    pair: np.ndarray
    connected: np.ndarray

    def detection_probability(self) -> np.ndarray:
        return -np.expm1(-2 * self.single) / 2

    def pair_probability(self) -> np.ndarray:
        return -np.expm1(-2 * self.pair) / 2


def expectation(dem: stim.DetectorErrorModel) -> Expectation:
    """Exact detection and pair statistics of an (undecomposed) detector error model.

    >>> e = expectation(stim.DetectorErrorModel("error(0.1) D0 D1\\nerror(0.2) D1\\ndetector D2"))
    >>> [round(float(p), 6) for p in e.detection_probability()], round(float(e.pair_probability()[0, 1]), 6)
    ([0.1, 0.26, 0.0], 0.1)
    """
    d = dem.num_detectors
    single = np.zeros(d)
    rows: list[int] = []
    cols: list[int] = []
    vals: list[float] = []
    for inst in dem.flattened():
        if inst.type != "error":
            continue
        f = float(to_additive(np.array(inst.args_copy()[0])))
        dets = sorted({t.val for t in inst.targets_copy() if t.is_relative_detector_id()})
        single[dets] += f
        for a in range(len(dets)):
            for b in range(a + 1, len(dets)):
                rows.append(dets[a])
                cols.append(dets[b])
                vals.append(f)
    pair = np.zeros((d, d))
    np.add.at(pair, (np.array(rows, dtype=int), np.array(cols, dtype=int)), np.array(vals))
    pair = pair + pair.T
    connected = pair > 0
    return Expectation(single=single, pair=pair, connected=connected)


def classify_pairs(layout: DetectorLayout, connected: np.ndarray) -> np.ndarray:
    """[D, D] index into :data:`CLASSES` for every pair (diagonal: -1)."""
    t = layout.round
    dt = np.abs(t[:, None] - t[None, :])
    same = np.all(layout.xy[:, None, :] == layout.xy[None, :, :], axis=2)
    out = np.full(dt.shape, CLASSES.index("other"))
    out[dt == 0] = CLASSES.index("space-like")
    out[(dt == 1) & same] = CLASSES.index("time-like")
    out[(dt == 1) & ~same] = CLASSES.index("diagonal")
    out[~connected] = CLASSES.index("unexpected")
    np.fill_diagonal(out, -1)
    return out


_GATES_1Q = frozenset({"H", "S", "S_DAG", "SQRT_X", "SQRT_X_DAG", "SQRT_Y", "SQRT_Y_DAG", "X", "Y", "Z",
                       "C_XYZ", "C_ZYX", "H_XY", "H_YZ"})
_MEASURES = {"M": "X_ERROR", "MR": "X_ERROR", "MX": "Z_ERROR", "MRX": "Z_ERROR", "MY": "X_ERROR",
             "MRY": "X_ERROR"}


def with_qubit_noise(circuit: stim.Circuit, *, qubit: int, p: float, only: bool = False,
                     kind: str = "depolarize") -> stim.Circuit:
    """``circuit`` with extra noise on one ``qubit`` (a bad qubit); ``only``: drop the circuit's
    own noise first. ``kind`` "depolarize": DEPOLARIZE1(p) after every TICK and before every
    measurement of it; "readout": a flip of probability p before every measurement of it;
    "gate_1q": DEPOLARIZE1(p) after every single-qubit gate on it.

    >>> c = with_qubit_noise(stim.Circuit("R 0\\nTICK\\nM 0"), qubit=0, p=0.01)
    >>> print(c)
    R 0
    TICK
    DEPOLARIZE1(0.01) 0 0
    M 0
    >>> print(with_qubit_noise(stim.Circuit("R 0\\nTICK\\nM 0"), qubit=0, p=0.01, kind="readout"))
    R 0
    TICK
    X_ERROR(0.01) 0
    M 0
    """
    if kind not in ("depolarize", "readout", "gate_1q"):
        raise ValueError(f"unknown kind {kind!r}")
    out = stim.Circuit()
    for inst in circuit.flattened():
        if only and isinstance(inst, stim.CircuitInstruction) and _is_noise(inst):
            continue
        on_qubit = inst.name != "TICK" and any(t.value == qubit for t in inst.targets_copy())
        before, after = _extra(inst.name, kind=kind, on_qubit=on_qubit)
        if before:
            out.append(before, [qubit], p)
        out.append(inst)
        if after:
            out.append(after, [qubit], p)
    return out


def _extra(name: str, *, kind: str, on_qubit: bool) -> tuple[str | None, str | None]:
    """(channel before, channel after) an instruction for :func:`with_qubit_noise`."""
    if kind == "depolarize":
        return ("DEPOLARIZE1" if on_qubit and name in _MEASURES else None,
                "DEPOLARIZE1" if name == "TICK" else None)
    if kind == "readout":
        return (_MEASURES[name] if on_qubit and name in _MEASURES else None), None
    return None, ("DEPOLARIZE1" if on_qubit and name in _GATES_1Q else None)


def _is_noise(inst: stim.CircuitInstruction) -> bool:
    return stim.gate_data(inst.name).is_noisy_gate and inst.name not in (
        "M", "MR", "MX", "MRX", "MY", "MRY", "MPP", "MXX", "MYY", "MZZ")
