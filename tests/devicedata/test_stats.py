"""Detection and pair statistics against exact values from small detector error models."""

from __future__ import annotations

import math

import numpy as np
import stim

from planner.devicedata import Events, count_events, expectation, pair_probability, to_additive

#: a small model: D0-D1 share an edge (a time-like-like pair), D1-D2 another, D0 and D2 have their
#: own boundary mechanisms, a hyperedge touches D0 D1 D2 (it counts in every pair it touches); D3 is
#: independent of the others
SMALL_DEM = stim.DetectorErrorModel("""
error(0.02) D0 D1
error(0.03) D1 D2
error(0.05) D0
error(0.04) D2
error(0.01) D0 D1 D2
error(0.05) D3
""")


def _xor(*q: float) -> float:
    """P(odd number of independent events): (1 - prod(1 - 2q)) / 2."""
    return (1 - math.prod(1 - 2 * x for x in q)) / 2


def test_exact_detection_probability_is_the_closed_form_of_independent_mechanisms() -> None:
    # closed form: P_i = (1 - prod_k (1 - 2 q_k)) / 2 over the mechanisms touching i
    # (standard XOR-of-independent-events identity; common practice, no source)
    e = expectation(SMALL_DEM)
    want = [_xor(0.02, 0.05, 0.01), _xor(0.02, 0.03, 0.01), _xor(0.03, 0.04, 0.01), 0.05]
    assert np.allclose(e.detection_probability(), want, rtol=1e-12)
    p = e.pair_probability()
    assert math.isclose(p[0, 1], _xor(0.02, 0.01)) and math.isclose(p[1, 2], _xor(0.03, 0.01))
    assert math.isclose(p[0, 2], 0.01) and e.connected[0, 2]


def test_sampled_detection_probability_matches_the_closed_form() -> None:
    shots = 400_000
    det, _, _ = SMALL_DEM.compile_sampler(seed=11).sample(shots)
    counts = count_events(Events.from_bool(det))
    want = np.array([_xor(0.02, 0.05, 0.01), _xor(0.02, 0.03, 0.01), _xor(0.03, 0.04, 0.01), 0.05])
    sigma = np.sqrt(want * (1 - want) / shots)
    assert np.all(np.abs(counts.detection_probability() - want) < 5 * sigma)


def test_pair_probability_from_sampled_data_matches_the_exact_value() -> None:
    """p_ij = 1/2 - 1/2 sqrt(1 - 4 (<x_i x_j> - <x_i><x_j>) / (1 - 2<x_i> - 2<x_j> + 4<x_i x_j>))
    (Spitz, Tarasinski, Beenakker, O'Brien, arXiv:1712.02360; Google Quantum AI, Nature 595, 383
    (2021), supplementary information) estimates the XOR of the mechanisms touching both
    detectors: here the edge and the hyperedge. Interval: 5 sigma of the estimator's spread
    over 20 independent repetitions' worth of batches."""
    shots = 600_000
    det, _, _ = SMALL_DEM.compile_sampler(seed=12).sample(shots)
    counts = count_events(Events.from_bool(det), batches=20)
    p = counts.pair_matrix()
    exact = expectation(SMALL_DEM).pair_probability()
    n = counts.shots[:, None]
    pairs = ((0, 1), (1, 2), (0, 2), (0, 3))  # the last: no shared mechanism, exact value 0
    per_batch = [pair_probability(counts.singles[:, i] / n[:, 0], counts.singles[:, j] / n[:, 0],
                                  counts.pairs[:, i, j] / n[:, 0]) for i, j in pairs]
    assert exact[0, 3] == 0
    for (i, j), batch in zip(pairs, per_batch):
        sigma = batch.std(ddof=1) / math.sqrt(len(batch))
        assert abs(p[i, j] - exact[i, j]) < 5 * sigma, (i, j, p[i, j], exact[i, j], sigma)


def test_counts_are_exact_and_batched() -> None:
    rng = np.random.default_rng(3)
    det = rng.random((5000, 37)) < 0.1
    c = count_events(Events.from_bool(det), batches=7, chunk=600)
    n, s, pairs = c.total()
    x = det.astype(np.int64)
    assert n == 5000 and np.array_equal(s, x.sum(0)) and np.array_equal(pairs, x.T @ x)
    assert len(c.shots) == 7 and c.shots.sum() == 5000


def test_additive_form_adds_independent_mechanisms() -> None:
    q = np.array([0.01, 0.2, 0.03])
    assert math.isclose(float(to_additive(np.array(_xor(*q)))), float(to_additive(q).sum()), rel_tol=1e-12)
