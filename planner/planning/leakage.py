"""Rate equations for the leaked population: the expected fraction of leaked data and measure
qubits after each round, for the configured injection, transport, decay and removal, stepped
through the same layers, in the same order, as the leakage sampler
(:mod:`planner.sampling.leakage`). Pure: nothing here samples.

Each qubit's leaked probability p follows, per layer: a two-qubit gate leaks each participating
qubit not yet leaked (p += (1 - p) g) and a leaked partner leaks it with ``transport`` (p_b +=
(1 - p_b) p_a t, treating the partners as independent: the mean-field part, exact when transport
is 0); a reset removes with ``reset_removal``; at the end of a round every qubit decays back with
``decay_per_round`` and data qubits are removed with ``data_removal``; heating leaks with
1 - exp(-rate t) over the layer. The steady state is the fixed point of one bulk round.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable, Mapping, Sequence
from typing import Any

import numpy as np
import stim

from planner.sampling.leakage_schedule import LeakLayer, heating_probability, measure_qubits, split_layers


@dataclasses.dataclass(frozen=True)
class PopulationCurve:
    """Expected leaked fraction of data and measure qubits at the end of each round (index 0 is
    round 1), and the steady state of both."""

    data: tuple[float, ...]
    measure: tuple[float, ...]
    steady_data: float
    steady_measure: float

    def to_json(self) -> dict[str, Any]:
        return {"data": list(self.data), "measure": list(self.measure),
                "steady_state": {"data": self.steady_data, "measure": self.steady_measure}}


def _gate(p: np.ndarray, layer: LeakLayer, params: Mapping[str, Any]) -> None:
    a, b = layer.pair_a, layer.pair_b
    t, g = float(params["transport"]), float(params["gate_2q"])
    pa, pb = p[a].copy(), p[b].copy()
    if t > 0:
        p[b] = pb + (1 - pb) * pa * t
        p[a] = pa + (1 - pa) * pb * t
    if g > 0:
        p[a] += (1 - p[a]) * g
        p[b] += (1 - p[b]) * g


def _step(p: np.ndarray, layer: LeakLayer, params: Mapping[str, Any], data: np.ndarray,
          qubits: np.ndarray, record: Callable[[np.ndarray], None] | None = None) -> None:
    """One layer of the rate equations, in the sampler's order (``p`` updated in place); at the
    end of a round ``record`` sees the population before the readout layer's heating, as the
    sampler records it."""
    if len(layer.pair_a):
        _gate(p, layer, params)
    if len(layer.resets):
        p[layer.resets] *= 1 - float(params["reset_removal"])
    if layer.round_end:
        p[qubits] *= 1 - float(params["decay_per_round"])
        p[data] *= 1 - float(params["data_removal"])
        if record is not None:
            record(p)
    heat = heating_probability(params, layer.duration_ns)
    if heat > 0:
        p[qubits] += (1 - p[qubits]) * heat


def population_curve(circuit: stim.Circuit, params: Mapping[str, Any], *, max_rounds: int = 100_000,
                     tolerance: float = 1e-13) -> PopulationCurve:
    """The rate-equation solution for ``circuit`` (a memory circuit) under ``params`` (a leakage
    task's parameters, see :func:`planner.noise.leakage_parameters`).

    >>> from planner.noise import NoiseModel
    >>> from planner.circuits import build_memory_circuit
    >>> c = build_memory_circuit(NoiseModel.sd6(1e-3), code="surface", distance=3, rounds=3, basis="z")
    >>> params = dict(gate_2q=1e-3, heating_per_us=0.0, transport=0.0, reset_removal=1.0,
    ...               decay_per_round=0.1, data_removal=0.0)
    >>> curve = population_curve(c, params)
    >>> curve.measure[0], round(curve.steady_data, 4)
    (0.0, 0.0234)
    """
    layers = split_layers(circuit, params)
    measure = measure_qubits(layers)
    qubits = np.array(sorted({int(q) for la in layers for q in (*la.pair_a, *la.pair_b, *la.measured,
                                                                 *la.resets)}), dtype=np.int64)
    data = np.setdiff1d(qubits, measure)
    p = np.zeros(circuit.num_qubits)
    data_curve: list[float] = []
    measure_curve: list[float] = []
    ends = [i for i, la in enumerate(layers) if la.round_end]
    def record(q: np.ndarray) -> None:
        data_curve.append(float(q[data].mean()) if len(data) else 0.0)
        measure_curve.append(float(q[measure].mean()) if len(measure) else 0.0)

    for layer in layers:
        _step(p, layer, params, data, qubits, record)
    bulk = layers[ends[-2] + 1: ends[-1] + 1] if len(ends) >= 2 else layers[: ends[-1] + 1] if ends else []
    # the steady state as recorded: at the end of a round, before the readout layer's heating
    steady = _fixed_point(p, bulk, params, data, qubits, max_rounds=max_rounds, tolerance=tolerance)
    return PopulationCurve(data=tuple(data_curve), measure=tuple(measure_curve),
                           steady_data=float(steady[data].mean()) if len(data) else 0.0,
                           steady_measure=float(steady[measure].mean()) if len(measure) else 0.0)


def _fixed_point(p: np.ndarray, bulk: Sequence[LeakLayer], params: Mapping[str, Any], data: np.ndarray,
                 qubits: np.ndarray, *, max_rounds: int, tolerance: float) -> np.ndarray:
    """``p`` after repeating the ``bulk`` round until it stops changing (the steady state, sampled
    at the end of a round)."""
    q = p.copy()
    seen: list[np.ndarray] = [q.copy()]
    if not bulk:
        return q
    for _ in range(max_rounds):
        before = seen[-1]
        for layer in bulk:
            _step(q, layer, params, data, qubits, lambda x: seen.append(x.copy()))
        if np.max(np.abs(seen[-1] - before)) < tolerance:
            break
    return seen[-1]


def steady_state_two_level(*, leak_per_round: float, return_per_round: float) -> float:
    """Steady leaked fraction of one qubit that leaks with ``leak_per_round`` when not leaked and
    returns with ``return_per_round`` when leaked: the fixed point of p -> p (1 - r) + (1 - p) l,
    l / (l + r) (the two-level rate equation; 0 when nothing leaks).

    >>> round(steady_state_two_level(leak_per_round=1e-3, return_per_round=0.099), 6)
    0.01
    """
    total = leak_per_round + return_per_round
    return leak_per_round / total if total > 0 else 0.0


def present_components(model: Any) -> tuple[str, ...]:
    """The components a fitted model's device has: all but one that never left 0 in the data
    (leakage, when the target has no ``[device.leakage]``: it is zero today and the answers
    leave it out rather than print a lever that cannot move anything)."""
    from planner.config import COMPONENTS

    return tuple(c for c in COMPONENTS if model.sampled_max[c] > 0)


def efficiency_for_goal(points: Sequence[tuple[float, float]], ln_goal: float) -> float | None:
    """The smallest removal efficiency whose ln(eps) meets ``ln_goal``, interpolated linearly in
    the efficiency between sampled points ``(efficiency, ln eps)`` (None: no sampled efficiency,
    not even 1, meets it; 0 when the smallest sampled one already does).

    >>> efficiency_for_goal([(0.0, -10.0), (0.5, -12.0), (1.0, -13.0)], -11.0)
    0.25
    >>> efficiency_for_goal([(0.0, -10.0), (1.0, -11.0)], -12.0) is None
    True
    """
    pts = sorted(points)
    if not pts:
        return None
    if pts[0][1] <= ln_goal:
        return pts[0][0]
    for (e0, y0), (e1, y1) in zip(pts, pts[1:]):
        if y1 <= ln_goal:
            return e0 + (e1 - e0) * (y0 - ln_goal) / (y0 - y1)
    return None
