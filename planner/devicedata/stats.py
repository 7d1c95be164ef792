"""Detection statistics of measured events: per-detector detection probability and the pair
probability p_ij, accumulated over shots in batches (the batches are what the bootstrap
resamples).

Counts are exact integers: each chunk of shots is unpacked to 0/1 and its co-occurrence matrix
X^T X is one sparse integer matrix product, added to the batch's int64 counts. p_ij uses the estimator

    p_ij = 1/2 - 1/2 sqrt(1 - 4 (<x_i x_j> - <x_i><x_j>) / (1 - 2<x_i> - 2<x_j> + 4<x_i x_j>))

(Spitz, Tarasinski, Beenakker, O'Brien, arXiv:1712.02360; Google Quantum AI, Nature 595, 383
(2021), supplementary information): the probability of the XOR of every independent mechanism
that flips both detectors.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from scipy import sparse

from planner.devicedata.events import Events, iter_chunks
from planner.errors import InputError

__all__ = ["DetectorCounts", "count_events", "pair_probability", "to_additive"]

#: bytes the per-batch count matrices may take together (int64 D x D each)
BATCH_MEMORY = 256 * 2**20
MAX_BATCHES = 40
MIN_BATCHES = 8


@dataclasses.dataclass(frozen=True)
class DetectorCounts:
    """Counts per batch of shots: ``shots`` [B], ``singles`` [B, D] (detections per detector),
    ``pairs`` [B, D, D] (shots where both fired; the diagonal repeats ``singles``)."""

    shots: np.ndarray
    singles: np.ndarray
    pairs: np.ndarray

    @property
    def num_shots(self) -> int:
        return int(self.shots.sum())

    @property
    def num_detectors(self) -> int:
        return int(self.singles.shape[1])

    def total(self, weights: np.ndarray | None = None) -> tuple[float, np.ndarray, np.ndarray]:
        """(shots, singles [D], pairs [D, D]) summed over batches (``weights``: a bootstrap draw)."""
        w = np.ones(len(self.shots)) if weights is None else np.asarray(weights, dtype=float)
        return float(w @ self.shots), w @ self.singles, np.tensordot(w, self.pairs, axes=1)

    def detection_probability(self) -> np.ndarray:
        n, s, _ = self.total()
        return s / n

    def pair_matrix(self) -> np.ndarray:
        """p_ij for every pair [D, D] (diagonal: NaN)."""
        n, s, c = self.total()
        out = pair_probability(s / n, s / n, c / n, outer=True)
        np.fill_diagonal(out, np.nan)
        return out

    def bootstrap_weights(self, *, draws: int, seed: int = 0) -> np.ndarray:
        """[draws, B] multinomial resampling of the batches."""
        rng = np.random.default_rng(seed)
        b = len(self.shots)
        return rng.multinomial(b, np.full(b, 1.0 / b), size=draws).astype(float)


def pair_probability(pi: np.ndarray, pj: np.ndarray, pij: np.ndarray, *, outer: bool = False) -> np.ndarray:
    """The p_ij estimator (module doc) from <x_i>, <x_j> and <x_i x_j>; ``outer``: pi, pj are
    vectors and pij a matrix. Values where the square root's argument is negative or the
    denominator vanishes (too few shots) are clipped to the nearest meaningful value.

    >>> round(float(pair_probability(np.array(0.1), np.array(0.1), np.array(0.02))), 6)
    0.014929
    """
    a, b = (pi[:, None], pj[None, :]) if outer else (pi, pj)
    with np.errstate(divide="ignore", invalid="ignore"):
        den = 1 - 2 * a - 2 * b + 4 * pij
        arg = 1 - 4 * (pij - a * b) / den
    arg = np.where(np.isfinite(arg), np.clip(arg, 0.0, 1.0), 1.0)
    return 0.5 - 0.5 * np.sqrt(arg)


def to_additive(p: np.ndarray) -> np.ndarray:
    """-ln(1 - 2p) / 2: the XOR of independent mechanisms q_k has this sum_k of theirs (so a
    detection or pair probability is linear in the mechanisms in this form).

    >>> q = np.array([0.01, 0.02]); p = (1 - np.prod(1 - 2 * q)) / 2
    >>> bool(np.isclose(to_additive(np.array(p)), to_additive(q).sum()))
    True
    """
    return -0.5 * np.log1p(-2 * np.clip(p, 0.0, 0.4999999))


def _num_batches(shots: int, detectors: int) -> int:
    by_memory = max(BATCH_MEMORY // max(8 * detectors * detectors, 1), 1)
    return int(max(1, min(MAX_BATCHES, by_memory, max(shots // 1000, MIN_BATCHES), shots)))


def count_events(events: Events, *, batches: int | None = None, chunk: int = 32768) -> DetectorCounts:
    """Detection and coincidence counts of ``events`` in ``batches`` contiguous batches of shots.

    >>> e = Events.from_bool(np.array([[1, 1, 0], [1, 0, 0], [0, 1, 1], [1, 1, 1]], dtype=bool))
    >>> c = count_events(e, batches=2)
    >>> c.shots.tolist(), c.total()[1].tolist(), int(c.total()[2][0, 1])
    ([2, 2], [3.0, 3.0, 2.0], 2)
    """
    n, d = events.num_shots, events.num_detectors
    if n < 2:
        raise InputError(f"{n} shot(s): the statistics need at least 2", source=events.source)
    b = batches or _num_batches(n, d)
    edges = np.linspace(0, n, b + 1).astype(int)
    shots = np.diff(edges).astype(np.int64)
    singles = np.zeros((b, d), dtype=np.int64)
    pairs = np.zeros((b, d, d), dtype=np.int64)
    for k in range(b):
        lo, hi = int(edges[k]), int(edges[k + 1])
        sub = Events(packed=events.packed[lo:hi], num_detectors=d, source=events.source)
        for _, x in iter_chunks(sub, chunk=chunk):
            # detection events are sparse: a sparse product is exact and single-threaded (a
            # multithreaded BLAS product was 5-50x slower on a busy 2-core machine)
            m = sparse.csr_matrix(x, dtype=np.int64)
            singles[k] += np.asarray(m.sum(axis=0)).ravel()
            pairs[k] += (m.T @ m).toarray()
    return DetectorCounts(shots=shots, singles=singles, pairs=pairs)
