"""Synthetic sample counts from a known error-budget model (test-only: no sampling, known truth).

Counts are binomial draws from ``eps_d = A / Lambda^((d+1)/2)`` with ``1/Lambda = sum_c w_c s_c``,
turned into shot error rates over ``rounds = d`` cycles; they carry the same metadata key set as
the sweep's tasks, so everything downstream treats them like real samples.
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Mapping, Sequence

import numpy as np
import sinter

from planner.config import COMPONENTS


def shot_rate(eps: float, rounds: int) -> float:
    """Shot error rate after ``rounds`` cycles of per-cycle rate ``eps`` (inverse of sinter's
    shot_error_rate_to_piece_error_rate): P = (1 - (1 - 2 eps)^r) / 2.

    >>> round(shot_rate(0.01, 3), 6)  # three cycles at 1%: an odd number of flips
    0.029404
    >>> import sinter; round(sinter.shot_error_rate_to_piece_error_rate(shot_rate(0.01, 3), pieces=3), 12)
    0.01
    """
    return (1 - (1 - 2 * eps) ** rounds) / 2


#: the components of a target without a [device.leakage] section (its tasks carry no leakage scale)
PAULI_COMPONENTS = tuple(c for c in COMPONENTS if c != "leakage")


def synthetic_stats(*, weights: Mapping[str, float], prefactor: float, distances: Sequence[int],
                    joint_scales: Sequence[float], component_scales: Sequence[float] = (),
                    components: Sequence[str] = PAULI_COMPONENTS, shots: int | Mapping[int, int] = 100_000,
                    bases: Sequence[str] = ("z", "x"), seed: int = 0,
                    curvature: Mapping[str, float] | None = None) -> list[sinter.TaskStats]:
    """Binomial counts for the grid, one TaskStats per (point, d, basis); seeded and deterministic."""
    rng = np.random.default_rng(seed)
    keys = COMPONENTS if "leakage" in weights or "leakage" in components else PAULI_COMPONENTS
    points = [("joint", f, {c: f for c in keys}) for f in joint_scales]
    for c in components:
        for f in component_scales:
            if f != 1.0:
                points.append((c, f, {k: (f if k == c else 1.0) for k in keys}))
    out = []
    for axis, factor, scales in points:
        inv = sum(weights.get(c, 0.0) * scales[c] + (curvature or {}).get(c, 0.0) * scales[c] ** 2
                  for c in keys)
        for d in distances:
            eps = min(prefactor * inv ** ((d + 1) / 2), 0.499)
            p = shot_rate(eps, d)
            n = shots[d] if isinstance(shots, Mapping) else shots
            for b in bases:
                meta = {"code": "surface", "d": d, "basis": b, "rounds": d, "axis": axis,
                        "factor": factor, "scales": scales}
                sid = hashlib.sha256(json.dumps(meta, sort_keys=True).encode()).hexdigest()
                out.append(sinter.TaskStats(strong_id=sid, decoder="pymatching", json_metadata=meta,
                                            shots=n, errors=int(rng.binomial(n, p))))
    return out
